//! Texture through the binary: the class in listings, `fit --prior texture|none`, the campaign
//! default (`set --texture-prior`), `list profiles --fill-from-texture`, and bad values.

mod common;

use common::{Scratch, porewise, stderr, stdout};

/// A site with a loam layer (a four-reading core and a nine-reading core), a clay layer with
/// texture and no core, and a layer without texture and no core. Invented values.
fn scratch() -> Scratch {
    let s = Scratch::new();
    let sites = s.write(
        "sites.csv",
        "site,name,latitude,longitude\nTX,Texture test,0.01,0.02\n",
    );
    let layers = s.write(
        "layers.csv",
        "site,top_cm,bottom_cm,horizon,sand_pct,silt_pct,clay_pct\n\
         TX,0,30,A,40,40,20\nTX,30,60,B,20,20,60\nTX,60,100,C,,,\n",
    );
    let lab = s.write(
        "lab.csv",
        "site,top_cm,bottom_cm,sample,method,suction_kpa,theta\n\
         TX,0,30,TX-4,plate,0,0.41\nTX,0,30,TX-4,plate,6,0.30\n\
         TX,0,30,TX-4,plate,33,0.20\nTX,0,30,TX-4,plate,1500,0.10\n\
         TX,0,30,TX-9,plate,0,0.42\nTX,0,30,TX-9,plate,1,0.415\nTX,0,30,TX-9,plate,3,0.39\n\
         TX,0,30,TX-9,plate,6,0.35\nTX,0,30,TX-9,plate,10,0.32\nTX,0,30,TX-9,plate,33,0.24\n\
         TX,0,30,TX-9,plate,100,0.18\nTX,0,30,TX-9,plate,500,0.13\nTX,0,30,TX-9,plate,1500,0.10\n",
    );
    s.import_ok("sites", &[&sites]);
    s.import_ok("layers", &[&layers]);
    s.import_ok("lab", &[&lab]);
    s
}

fn fit(s: &Scratch, args: &[&str]) -> assert_cmd::assert::Assert {
    porewise().arg("fit").arg(&s.db).args(args).assert()
}

#[test]
fn layers_list_their_texture_class() {
    let s = scratch();
    let out = s.list(&["layers", "--format", "csv"]);
    let header = out.lines().next().expect("header");
    let col = header
        .split(',')
        .position(|c| c == "texture")
        .expect("texture column");
    let classes: Vec<&str> = out
        .lines()
        .skip(1)
        .map(|l| l.split(',').nth(col).expect("cell"))
        .collect();
    assert_eq!(classes, ["loam", "clay", ""]);
}

#[test]
fn the_prior_fits_the_four_reading_core_and_none_makes_the_plain_fit_current() {
    let s = scratch();
    // Without the prior the four-reading core cannot be fitted by van Genuchten.
    let plain = fit(&s, &["--model", "van-genuchten"]).code(3);
    assert!(stderr(&plain).contains("TX-4"), "{}", stderr(&plain));
    let with = fit(&s, &["--prior", "texture"]).success();
    assert!(
        stdout(&with).contains("2 of them with the texture prior"),
        "{}",
        stdout(&with)
    );
    let out = s.list(&["fits", "--format", "csv"]);
    let basis: Vec<&str> = out
        .lines()
        .skip(1)
        .map(|l| l.split(',').nth(5).expect("basis"))
        .collect();
    assert_eq!(
        basis,
        ["readings+texture prior", "readings+texture prior"],
        "{out}"
    );
    // The user chooses: --prior none refits the nine-reading core from its readings alone.
    fit(&s, &["--sample", "TX-9", "--prior", "none"]).success();
    let out = s.list(&["fits", "--sample", "TX-9", "--format", "csv"]);
    assert!(
        out.lines().nth(1).expect("row").contains(",readings,"),
        "{out}"
    );
}

#[test]
fn the_campaign_default_applies_to_samples_with_few_readings() {
    let s = scratch();
    let set = porewise()
        .arg("set")
        .arg(&s.db)
        .args(["--texture-prior", "5"])
        .assert()
        .success();
    assert!(stdout(&set).contains("samples with at most 5 readings (was off)"));
    fit(&s, &[]).success();
    let out = s.list(&["fits", "--format", "csv"]);
    let rows: Vec<(&str, &str)> = out
        .lines()
        .skip(1)
        .map(|l| {
            let c: Vec<&str> = l.split(',').collect();
            (c[0], c[5])
        })
        .collect();
    assert_eq!(
        rows,
        [("TX-4", "readings+texture prior"), ("TX-9", "readings")]
    );
    // A model asked for by name is fitted as asked.
    fit(&s, &["--model", "brooks-corey"]).code(3);
    porewise()
        .arg("set")
        .arg(&s.db)
        .args(["--texture-prior", "off"])
        .assert()
        .success();
    fit(&s, &["--model", "van-genuchten"]).code(3);
}

#[test]
fn profiles_fill_uncovered_depth_only_when_asked() {
    let s = scratch();
    fit(&s, &["--prior", "texture"]).success();
    let measured = s.list(&["profiles", "--format", "csv"]);
    assert!(!measured.contains("texture only"), "{measured}");
    let filled = s.list(&["profiles", "--fill-from-texture", "--format", "csv"]);
    let clay = filled
        .lines()
        .find(|l| l.starts_with("TX,30-60,"))
        .expect("clay row");
    assert!(clay.contains(",clay,◌ texture only,0,0,0,"), "{clay}");
    // The layer without texture stays empty; the total counts the estimate and says so.
    let c = filled
        .lines()
        .find(|l| l.starts_with("TX,60-100,"))
        .expect("row");
    assert!(c.contains(",,,0,0,0,,"), "{c}");
    let table = s.list(&["profiles", "--fill-from-texture"]);
    assert!(table.contains("includes texture estimates"), "{table}");
    assert!(table.contains("Carsel & Parrish 1988"), "{table}");
}

#[test]
fn bad_prior_values_are_usage_errors_and_write_nothing() {
    let s = scratch();
    let before = s.counts();
    let bad = fit(&s, &["--prior", "soil"]).code(2);
    assert!(
        stderr(&bad).contains("expected texture or none"),
        "{}",
        stderr(&bad)
    );
    let bad = porewise()
        .arg("set")
        .arg(&s.db)
        .args(["--texture-prior", "2000"])
        .assert()
        .code(2);
    assert!(stderr(&bad).contains("0-1000"), "{}", stderr(&bad));
    let bad = fit(&s, &["--prior", "texture", "--model", "kosugi"]).code(1);
    assert!(
        stderr(&bad).contains("fits van Genuchten"),
        "{}",
        stderr(&bad)
    );
    let bad = fit(&s, &["--prior", "texture", "--fix", "theta_r=0"]).code(1);
    assert!(
        stderr(&bad).contains("does not hold parameters"),
        "{}",
        stderr(&bad)
    );
    assert_eq!(s.counts(), before);
}

#[test]
fn a_review_refit_keeps_the_texture_prior() {
    let s = scratch();
    fit(&s, &["--prior", "texture"]).success();
    let id: i64 = s
        .connect()
        .query_row("SELECT id FROM sample WHERE code = 'TX-4'", [], |r| {
            r.get(0)
        })
        .expect("sample");
    let mut c = porewise::store::Campaign::open(&s.db).expect("open");
    let run = porewise::analysis::review::refit_samples(&mut c, &[id]).expect("refit");
    assert_eq!(run.fitted.len(), 1, "{run:?}");
    assert!(run.failed.is_empty(), "{run:?}");
    drop(c);
    let out = s.list(&["fits", "--sample", "TX-4", "--all", "--format", "csv"]);
    // The history: both attempts asked for the prior, both ok, the refit current.
    let rows: Vec<Vec<&str>> = out
        .lines()
        .skip(1)
        .map(|l| l.split(',').take(6).collect())
        .collect();
    let requested: Vec<(&str, &str, &str)> = rows.iter().map(|r| (r[3], r[4], r[5])).collect();
    assert_eq!(
        requested,
        [
            ("van-genuchten+texture-prior", "ok", ""),
            ("van-genuchten+texture-prior", "ok", "yes")
        ],
        "{out}"
    );
}
