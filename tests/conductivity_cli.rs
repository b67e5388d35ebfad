//! `porewise import conductivity` and `porewise list DB conductivity` through the real binary:
//! good files in every unit, each class of bad input at its exact `FILE:LINE:COLUMN`, nothing
//! written on a refusal, re-import refused.

mod common;

use common::{Scratch, stderr, stdout};

/// Import `file` (after the valid evaporation file when `after_valid`), expect exit 1 with
/// each `expected` text and `problems` problems, and no conductivity reading or Ks written.
fn rejects(file: &str, after_valid: bool, expected: &[&str], problems: usize) {
    let s = Scratch::new();
    if after_valid {
        s.import_ok("conductivity", &["valid/conductivity_evaporation.csv"]);
    }
    let before = (
        s.count("conductivity_reading"),
        s.count("sample WHERE ks_cm_per_day IS NOT NULL"),
    );
    s.refused("conductivity", &[file], &[], expected, problems);
    let after = (
        s.count("conductivity_reading"),
        s.count("sample WHERE ks_cm_per_day IS NOT NULL"),
    );
    assert_eq!(before, after, "a refused import wrote conductivity data");
}

#[test]
fn bad_values_are_placed_at_file_line_column() {
    rejects(
        "invalid/conductivity_bad_values.csv",
        false,
        &[
            "invalid/conductivity_bad_values.csv:3:conductivity_mm_per_h: found \"0\", expected \
             a conductivity greater than 0 and at most 4167000 mm/h (1e7 cm/day)",
            "invalid/conductivity_bad_values.csv:4:conductivity_mm_per_h: found \"-0.002\", \
             expected a conductivity greater than 0",
            "invalid/conductivity_bad_values.csv:5:conductivity_mm_per_h: found \"NaN\", \
             expected a finite number",
            "invalid/conductivity_bad_values.csv:6:conductivity_mm_per_h: found \"inf\", \
             expected a finite number",
            "invalid/conductivity_bad_values.csv:7:suction_hpa: found \"-4\", expected a \
             suction of 0 or more",
            "invalid/conductivity_bad_values.csv:8:ks_mm_per_h: found \"14\", but \
             invalid/conductivity_bad_values.csv:2 gives sample \"K1\" a Ks of 28.8 cm/day; \
             expected one Ks per sample",
        ],
        6,
    );
}

#[test]
fn a_conductivity_column_needs_its_unit() {
    rejects(
        "invalid/conductivity_no_unit.csv",
        false,
        &[
            "invalid/conductivity_no_unit.csv:1:conductivity_<unit>: found no conductivity \
             column in the header, expected one of conductivity_cm_per_day, \
             conductivity_cm_per_h, conductivity_mm_per_h, conductivity_m_per_s",
        ],
        1,
    );
    rejects(
        "invalid/conductivity_unknown_unit.csv",
        false,
        &[
            "invalid/conductivity_unknown_unit.csv:1:conductivity_in_per_h: found the unit \
             \"in_per_h\" in column \"conductivity_in_per_h\"",
        ],
        1,
    );
}

#[test]
fn one_place_of_measurement_per_file() {
    rejects(
        "invalid/conductivity_suction_and_theta.csv",
        false,
        &[
            "invalid/conductivity_suction_and_theta.csv:1:theta: found a second column \
             \"theta\" saying where K was measured besides \"suction_cm\"",
        ],
        1,
    );
    rejects(
        "invalid/conductivity_gravimetric.csv",
        false,
        &[
            "invalid/conductivity_gravimetric.csv:1:water_g_per_g: found the gravimetric \
             column \"water_g_per_g\", expected a volumetric water content (theta or theta_pct)",
        ],
        1,
    );
}

#[test]
fn duplicates_in_the_file_and_against_the_campaign() {
    rejects(
        "invalid/conductivity_duplicate.csv",
        false,
        &[
            "invalid/conductivity_duplicate.csv:4:suction_kpa: found sample \"K1\" at \
             101.972 cm again (first at invalid/conductivity_duplicate.csv:2)",
        ],
        1,
    );
    rejects(
        "invalid/conductivity_repeats_campaign.csv",
        true,
        &[
            "invalid/conductivity_repeats_campaign.csv:2:suction_cm: found sample \"LV-K1\" at \
             60 cm, which the campaign already holds a conductivity for (from \
             valid/conductivity_evaporation.csv:3)",
            "invalid/conductivity_repeats_campaign.csv:4:ks_cm_per_day: found a Ks of 13 \
             cm/day for sample \"LV-K2\", but the campaign holds 12 cm/day",
        ],
        2,
    );
    rejects(
        "invalid/conductivity_sample_two_layers.csv",
        false,
        &[
            "invalid/conductivity_sample_two_layers.csv:3:sample: found sample \"K1\" under \
             layer LV:20-40, but invalid/conductivity_sample_two_layers.csv:2 puts it under \
             LV:0-20",
        ],
        1,
    );
}

#[test]
fn good_files_import_in_every_unit_and_list_back() {
    let s = Scratch::new();
    let out = s
        .import(
            "conductivity",
            &[
                "valid/conductivity_evaporation.csv",
                "valid/conductivity_theta_m_per_s.csv",
            ],
            &[],
        )
        .success();
    assert_eq!(
        stdout(&out).trim(),
        "added 1 site, 2 layers, 2 samples, 8 conductivity readings, 2 Ks values from 2 files"
    );
    assert_eq!(s.count("conductivity_reading"), 8);
    assert_eq!(
        s.count("import_batch WHERE kind = 'conductivity'"),
        2,
        "one batch per file, of the conductivity kind"
    );
    let csv = s.list(&["conductivity", "--format", "csv"]);
    let lines: Vec<&str> = csv.lines().collect();
    assert_eq!(
        lines[0],
        "reading,sample,site,top_cm,bottom_cm,suction_cm,theta,conductivity_cm_per_day,\
         ks_cm_per_day,layer_ks_cm_per_day,flag,method,measured_on,notes,source,uid"
    );
    assert!(
        lines[1].starts_with(
            "1,LV-K1,LV,0,20,25,,3.1,41.5,,,evaporation,2026-05-12,,\
             valid/conductivity_evaporation.csv:2,"
        ),
        "{}",
        lines[1]
    );
    // 2.1e-7 m/s = 2.1e-7 x 100 cm x 86 400 s/day = 1.8144 cm/day; listed in m/s it reads
    // back as written.
    assert!(csv.contains(",0.385,1.8144,41.5,"), "{csv}");
    let in_m_per_s = s.list(&[
        "conductivity",
        "--sample",
        "LV-K1",
        "--k-units",
        "m/s",
        "--format",
        "csv",
    ]);
    assert!(in_m_per_s.contains(",0.385,2.1e-7,"), "{in_m_per_s}");
    assert!(!in_m_per_s.contains("LV-K2"));
    // Re-import of the same content is refused and writes nothing.
    let again = s
        .import("conductivity", &["valid/conductivity_evaporation.csv"], &[])
        .code(1);
    assert!(
        stderr(&again).contains("this content was already imported"),
        "{}",
        stderr(&again)
    );
    assert_eq!(s.count("conductivity_reading"), 8);
}

#[test]
fn a_dry_run_writes_nothing() {
    let s = Scratch::new();
    let out = s
        .import(
            "conductivity",
            &["valid/conductivity_evaporation.csv"],
            &["--dry-run"],
        )
        .success();
    assert!(stdout(&out).contains("dry run: 1 file valid; would add"));
    assert_eq!(s.count("conductivity_reading"), 0);
    assert_eq!(s.count("sample"), 0);
}

/// Run porewise with `args` from the fixture directory; the campaign path goes where `DB` is.
fn run(s: &Scratch, args: &[&str]) -> assert_cmd::assert::Assert {
    let db = s.db.display().to_string();
    let args: Vec<String> = args
        .iter()
        .map(|a| {
            if *a == "DB" {
                db.clone()
            } else {
                (*a).to_string()
            }
        })
        .collect();
    common::porewise().args(&args).assert()
}

#[test]
fn a_joint_fit_is_recorded_beside_the_retention_fit_and_either_can_be_current() {
    let s = Scratch::new();
    s.import_ok("lab", &["valid/lab_kpa.csv"]);
    s.import_ok("conductivity", &["valid/conductivity_lv_a1.csv"]);
    run(
        &s,
        &["fit", "DB", "--sample", "LV-A1", "--model", "van-genuchten"],
    )
    .success();
    let out = run(
        &s,
        &["fit", "DB", "--sample", "LV-A1", "--with-conductivity"],
    )
    .success();
    assert!(
        stdout(&out).contains("fitted 1 sample with van-genuchten+conductivity; 0 failed"),
        "{}",
        stdout(&out)
    );
    let history = s.list(&["fits", "--sample", "LV-A1", "--all", "--format", "csv"]);
    let lines: Vec<&str> = history.lines().collect();
    assert_eq!(lines.len(), 3, "{history}");
    assert!(
        lines[1].starts_with("1,LV-A1,van-genuchten,van-genuchten,ok,,"),
        "{history}"
    );
    assert!(
        lines[2].starts_with("2,LV-A1,van-genuchten,van-genuchten+conductivity,ok,yes,"),
        "{history}"
    );
    // Ks and L with their errors, both SSEs and the weighting.
    let joint = s.list(&["conductivity-fits", "--format", "json"]);
    let rows: serde_json::Value = serde_json::from_str(&joint).expect("json");
    let row = &rows[0];
    assert_eq!(row["fit"], 2);
    assert_eq!(row["conductivity_model"], "mualem-van-genuchten");
    assert_eq!(row["weighting"], "estimated");
    let ks = row["ks_cm_per_day"].as_f64().expect("ks");
    // The file's K values were made (invented) from Ks 28 cm/day, L -0.4, noise sd 0.08 in
    // log10 K; the fit finds them within a few standard errors.
    let ks_se = row["ks_cm_per_day_se"].as_f64().expect("se");
    assert!((ks - 28.0).abs() < 3.0 * ks_se, "Ks {ks} ± {ks_se}");
    let l = row["pore_connectivity"].as_f64().expect("L");
    let l_se = row["pore_connectivity_se"].as_f64().expect("se");
    assert!((l + 0.4).abs() < 3.0 * l_se, "L {l} ± {l_se}");
    assert_eq!(row["n_theta"], 6);
    assert_eq!(row["n_k"], 9);
    assert!(row["sse_theta"].as_f64().is_some() && row["sse_log10_k"].as_f64().is_some());
    assert_eq!(row["k_readings"], "as fitted");
    // The retention-only fit is made current again, then the joint one.
    let back = run(&s, &["current", "DB", "1"]).success();
    assert_eq!(
        stdout(&back).trim(),
        "fit 1 is now the current fit of sample LV-A1 (was fit 2)"
    );
    let joint = s.list(&["conductivity-fits", "--format", "csv"]);
    assert!(
        joint
            .lines()
            .nth(1)
            .is_some_and(|l| l.starts_with("2,LV-A1,LV,,")),
        "{joint}"
    );
    run(&s, &["current", "DB", "2"]).success();
    let missing = run(&s, &["current", "DB", "99"]).code(1);
    assert!(
        stderr(&missing).contains("no fit 99"),
        "{}",
        stderr(&missing)
    );
    let reason = "conductivity readings changed since the joint fit";
    assert!(!s.list(&["fits", "--sample", "LV-A1"]).contains(reason));
    // Another K reading of the sample: the listing says the joint fit no longer has them all,
    // and the current (joint) fit is stale for it.
    s.import_ok("conductivity", &["valid/conductivity_lv_a1_more.csv"]);
    let joint = s.list(&["conductivity-fits", "--format", "json"]);
    let rows: serde_json::Value = serde_json::from_str(&joint).expect("json");
    assert_eq!(rows[0]["k_readings"], "changed since the fit");
    let fits = s.list(&["fits", "--sample", "LV-A1"]);
    assert!(fits.contains(reason), "{fits}");
}

#[test]
fn joint_fits_refuse_what_they_cannot_do() {
    let s = Scratch::new();
    s.import_ok("lab", &["valid/lab_kpa.csv"]);
    s.import_ok("conductivity", &["valid/conductivity_lv_a1.csv"]);
    let err = |args: &[&str]| stderr(&run(&s, args).code(1));
    assert!(
        err(&["fit", "DB", "--with-conductivity", "--model", "campbell"])
            .contains("Campbell has no Mualem conductivity form"),
    );
    assert!(
        err(&["fit", "DB", "--with-conductivity", "--model", "auto"]).contains("fits one model")
    );
    assert!(
        err(&["fit", "DB", "--with-conductivity", "--k-weight", "0"])
            .contains("--k-weight 0: expected a finite number above 0")
    );
    assert!(
        err(&[
            "fit",
            "DB",
            "--with-conductivity",
            "--fix",
            "pore_connectivity=40"
        ])
        .contains("expected pore_connectivity from -10 to 10")
    );
    // A sample without conductivity readings asked for by name: exit 3 and said why.
    let out = run(
        &s,
        &[
            "fit",
            "DB",
            "--with-conductivity",
            "--sample",
            "LV-B1",
            "--sample",
            "LV-A1",
        ],
    )
    .code(3);
    assert!(
        stderr(&out).contains("sample LV-B1: not fitted: it has no conductivity readings"),
        "{}",
        stderr(&out)
    );
    // Ks held at the measured value, L held, a user weight: all stated in the fit.
    run(
        &s,
        &[
            "fit",
            "DB",
            "--with-conductivity",
            "--sample",
            "LV-A1",
            "--ks",
            "measured",
            "--fix",
            "pore_connectivity=0.5",
            "--k-weight",
            "0.001",
        ],
    )
    .success();
    let joint = s.list(&["conductivity-fits", "--format", "json"]);
    let rows: serde_json::Value = serde_json::from_str(&joint).expect("json");
    let last = rows.as_array().and_then(|a| a.last()).expect("a row");
    assert_eq!(last["ks_cm_per_day"], 31.5);
    assert_eq!(last["pore_connectivity"], 0.5);
    assert_eq!(last["weighting"], "user 0.001");
    assert!(
        last["notes"]
            .as_str()
            .is_some_and(|n| n.contains("Ks held at 31.5"))
    );
}

#[test]
fn the_export_carries_conductivity_readings_and_the_joint_fit() {
    let s = Scratch::new();
    s.import_ok("lab", &["valid/lab_kpa.csv"]);
    s.import_ok("conductivity", &["valid/conductivity_lv_a1.csv"]);
    run(
        &s,
        &["fit", "DB", "--sample", "LV-A1", "--with-conductivity"],
    )
    .success();
    let out = s.dir.path().join("out");
    let out_text = out.display().to_string();
    run(&s, &["export", "DB", "--to", &out_text]).success();
    let json: serde_json::Value = serde_json::from_str(
        &std::fs::read_to_string(out.join("campaign.json")).expect("campaign.json"),
    )
    .expect("json");
    assert_eq!(json["schema_version"], 5);
    let sample = &json["data"]["sites"][0]["layers"][0]["samples"][0];
    assert_eq!(sample["code"], "LV-A1");
    assert_eq!(sample["ks_cm_per_day"], 31.5);
    let k = sample["conductivity_readings"]
        .as_array()
        .expect("readings");
    assert_eq!(k.len(), 9);
    assert_eq!(k[0]["suction_cm"], 4.0);
    assert_eq!(k[0]["k_cm_per_day"], 15.9);
    assert_eq!(k[0]["used_in_fit"], true);
    assert_eq!(
        k[0]["provenance"]["file_name"],
        "valid/conductivity_lv_a1.csv"
    );
    let joint = &sample["fit"]["joint"];
    assert_eq!(joint["conductivity_model"], "mualem-van-genuchten");
    assert!(
        joint["ks_cm_per_day"]["se"]
            .as_f64()
            .is_some_and(|v| v > 0.0)
    );
    assert_eq!(
        joint["covariance"]["names"].as_array().map(Vec::len),
        Some(6)
    );
    // The derived K uses the fitted Ks and L, with an interval over every parameter.
    let derived = &sample["fit"]["derived"];
    let ks = joint["ks_cm_per_day"]["value"].as_f64().expect("ks");
    assert_eq!(derived["ks_cm_per_day"].as_f64(), Some(ks));
    assert!(
        derived["intervals"]["k_field_capacity_cm_per_day"]["note"]
            .as_str()
            .is_some_and(|n| n.contains("Ks and L included"))
    );
    let mut reader = csv::Reader::from_path(out.join("parameters.csv")).expect("csv");
    let header = reader.headers().expect("header").clone();
    let row = reader.records().next().expect("LV-A1").expect("record");
    let at = |name: &str| &row[header.iter().position(|h| h == name).expect(name)];
    assert_eq!(at("sample"), "LV-A1");
    assert_eq!(at("fitted_with_conductivity"), "yes");
    assert_eq!(at("ks_fitted_cm_per_day").parse::<f64>().ok(), Some(ks));
    assert_eq!(at("n_conductivity"), "9");
    assert_eq!(at("conductivity_weighting"), "estimated");
    // The page draws the site's conductivity beside its retention chart: the 9 measured K,
    // the joint fit's curve and the core's measured Ks.
    let html = std::fs::read_to_string(out.join("report.html")).expect("report.html");
    let start = html
        .find("aria-label=\"Measured and fitted hydraulic conductivity of site LV\"")
        .expect("a conductivity chart");
    let svg = &html[start..start + html[start..].find("</svg>").expect("svg end")];
    assert!(svg.matches("<circle").count() >= 9, "measured K drawn");
    assert!(svg.contains("conductivity K, cm/day (log scale)"));
    assert!(
        html.contains("bars at the left edge: each core&#39;s measured Ks")
            || html.contains("bars at the left edge: each core's measured Ks")
    );
}

#[test]
fn a_site_without_conductivity_has_no_conductivity_chart() {
    let s = Scratch::new();
    s.import_ok("lab", &["valid/lab_kpa.csv"]);
    run(
        &s,
        &["fit", "DB", "--sample", "LV-A1", "--model", "van-genuchten"],
    )
    .success();
    let out = s.dir.path().join("out");
    run(
        &s,
        &[
            "export",
            "DB",
            "--to",
            &out.display().to_string(),
            "--format",
            "html",
        ],
    )
    .success();
    let html = std::fs::read_to_string(out.join("report.html")).expect("report.html");
    assert!(html.contains("Retention curves and readings of site LV"));
    assert!(!html.contains("hydraulic conductivity of site"));
}

#[test]
fn curve_tabulates_k_of_a_joint_fit_from_its_own_ks_and_l() {
    let s = Scratch::new();
    s.import_ok("lab", &["valid/lab_kpa.csv"]);
    s.import_ok("conductivity", &["valid/conductivity_lv_a1.csv"]);
    run(
        &s,
        &["fit", "DB", "--sample", "LV-A1", "--model", "van-genuchten"],
    )
    .success();
    let plain = run(
        &s,
        &[
            "curve",
            "--from",
            "DB",
            "--sample",
            "LV-A1",
            "--suction-cm",
            "100",
        ],
    )
    .success();
    assert_eq!(
        stdout(&plain).lines().next(),
        Some("suction_cm,theta,effective_saturation,capacity_per_cm")
    );
    run(
        &s,
        &["fit", "DB", "--sample", "LV-A1", "--with-conductivity"],
    )
    .success();
    let joint = s.list(&["conductivity-fits", "--format", "json"]);
    let rows: serde_json::Value = serde_json::from_str(&joint).expect("json");
    let ks = rows[0]["ks_cm_per_day"].as_f64().expect("ks");
    // At h = 0 the curve is saturated: K = Ks exactly.
    let out = run(
        &s,
        &[
            "curve",
            "--from",
            "DB",
            "--sample",
            "LV-A1",
            "--suction-cm",
            "0,100",
        ],
    )
    .success();
    let text = stdout(&out);
    let lines: Vec<&str> = text.lines().collect();
    assert_eq!(
        lines[0],
        "suction_cm,theta,effective_saturation,capacity_per_cm,relative_conductivity,\
         conductivity_cm_per_day,conductivity_model"
    );
    let first: Vec<&str> = lines[1].split(',').collect();
    assert_eq!(first[4], "1");
    assert_eq!(first[5].parse::<f64>().ok(), Some(ks));
    assert_eq!(first[6], "mualem-van-genuchten");
    let refused = run(
        &s,
        &[
            "curve",
            "--from",
            "DB",
            "--sample",
            "LV-A1",
            "--ks-cm-per-day",
            "10",
        ],
    )
    .code(1);
    assert!(stderr(&refused).contains("its K uses the fitted Ks and L"));
}

/// Accepting a suspect reading of a core whose current fit is joint refits it jointly: the
/// review's refit keeps the kind of fit the user chose.
#[test]
fn a_review_refit_of_a_joint_fit_stays_joint() {
    let dir = tempfile::tempdir().expect("temp dir");
    let src = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-db");
    for file in porewise::demo::generate() {
        std::fs::copy(src.join(file.name), dir.path().join(file.name)).expect("copy");
    }
    let db = porewise::cli::demo::ensure_built(dir.path()).expect("demo builds");
    let conn = rusqlite::Connection::open(&db).expect("open");
    let current = |conn: &rusqlite::Connection| -> (i64, Option<String>, bool) {
        conn.query_row(
            "SELECT f.id, f.requested, f.joint IS NOT NULL FROM fit f
             JOIN sample m ON m.id = f.sample_id
             WHERE m.code = 'TER1-A-a' AND f.is_current = 1",
            [],
            |r| Ok((r.get(0)?, r.get(1)?, r.get(2)?)),
        )
        .expect("a current fit")
    };
    let (before, requested, joint) = current(&conn);
    assert!(joint, "the demo fits TER1-A-a jointly ({requested:?})");
    let reading: i64 = conn
        .query_row(
            "SELECT r.id FROM flag g JOIN reading r ON r.id = g.reading_id
             JOIN sample m ON m.id = r.sample_id
             WHERE m.code = 'TER1-A-a' AND g.status = 'suggested'",
            [],
            |r| r.get(0),
        )
        .expect("the planted suspect");
    drop(conn);
    common::porewise()
        .arg("review")
        .arg(&db)
        .args(["--accept", &reading.to_string()])
        .assert()
        .success();
    let conn = rusqlite::Connection::open(&db).expect("open");
    let (after, requested, joint) = current(&conn);
    assert!(after > before, "refitted");
    assert!(joint, "{requested:?}");
    assert_eq!(requested.as_deref(), Some("van-genuchten+conductivity"));
}

#[test]
fn a_flagged_conductivity_reading_leaves_joint_fits_until_unflagged() {
    let s = Scratch::new();
    s.import_ok("lab", &["valid/lab_kpa.csv"]);
    s.import_ok("conductivity", &["valid/conductivity_lv_a1.csv"]);
    run(
        &s,
        &["fit", "DB", "--sample", "LV-A1", "--with-conductivity"],
    )
    .success();
    let n_k = |s: &Scratch| {
        let joint = s.list(&["conductivity-fits", "--format", "json"]);
        let rows: serde_json::Value = serde_json::from_str(&joint).expect("json");
        rows.as_array().expect("rows").last().expect("a joint fit")["n_k"]
            .as_i64()
            .expect("n_k")
    };
    assert_eq!(n_k(&s), 9);
    let listing = s.list(&["conductivity", "--format", "csv"]);
    let first: i64 = listing
        .lines()
        .nth(1)
        .and_then(|l| l.split(',').next())
        .and_then(|id| id.parse().ok())
        .expect("a conductivity reading id");
    let id = first.to_string();
    // A retention reading id is not a conductivity reading id: the flag names its kind.
    let out = run(
        &s,
        &[
            "flag",
            "DB",
            &id,
            "--conductivity",
            "--reason",
            "sensor drift",
        ],
    )
    .success();
    assert_eq!(
        stdout(&out).trim(),
        format!(
            "conductivity reading {id} flagged (flag 1); left out of joint fits; the joint fit \
             of LV-A1 is stale until refitted (porewise fit DB --sample LV-A1 \
             --with-conductivity)"
        )
    );
    let again = run(
        &s,
        &["flag", "DB", &id, "--conductivity", "--reason", "twice"],
    )
    .code(1);
    assert!(
        stderr(&again).contains(&format!("conductivity reading {id} is already flagged")),
        "{}",
        stderr(&again)
    );
    let missing = run(
        &s,
        &["flag", "DB", "9999", "--conductivity", "--reason", "x"],
    )
    .code(1);
    assert!(
        stderr(&missing).contains("conductivity reading"),
        "{}",
        stderr(&missing)
    );
    // Listings: the reading is marked, the flag names it in its own column.
    let listing = s.list(&["conductivity", "--format", "csv"]);
    let header: Vec<&str> = listing.lines().next().expect("header").split(',').collect();
    let flag_col = header
        .iter()
        .position(|c| *c == "flag")
        .expect("flag column");
    let row: Vec<&str> = listing.lines().nth(1).expect("row").split(',').collect();
    assert_eq!(row[flag_col], "excluded", "{listing}");
    let flags = s.list(&["flags", "--format", "csv"]);
    assert!(
        flags
            .lines()
            .nth(1)
            .is_some_and(|l| l.starts_with(&format!("1,,,{id},LV-A1,LV,"))),
        "{flags}"
    );
    assert!(
        s.list(&["fits", "--sample", "LV-A1"])
            .contains("conductivity readings changed since the joint fit")
    );
    // The refit leaves the flagged reading out.
    run(
        &s,
        &["fit", "DB", "--sample", "LV-A1", "--with-conductivity"],
    )
    .success();
    assert_eq!(n_k(&s), 8);
    assert!(
        !s.list(&["fits", "--sample", "LV-A1"])
            .contains("conductivity readings changed since the joint fit")
    );
    // Unflagged, it is back, and the fit made without it is stale again.
    let out = run(
        &s,
        &[
            "unflag",
            "DB",
            &id,
            "--conductivity",
            "--note",
            "drift corrected",
        ],
    )
    .success();
    assert!(
        stdout(&out).starts_with(&format!(
            "conductivity reading {id} back in fits (1 flag cleared)"
        )),
        "{}",
        stdout(&out)
    );
    assert!(
        s.list(&["fits", "--sample", "LV-A1"])
            .contains("conductivity readings changed since the joint fit")
    );
    run(
        &s,
        &["fit", "DB", "--sample", "LV-A1", "--with-conductivity"],
    )
    .success();
    assert_eq!(n_k(&s), 9);
    // The audit trail keeps both decisions.
    let events = s.list(&["flag-events", "--format", "csv"]);
    assert_eq!(events.lines().count(), 3, "{events}");
}
