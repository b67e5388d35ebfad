//! `porewise advise` through the binary on a small generated campaign: the ranking and its
//! order, the chosen suction against every candidate's listed effect, the pooled noise of a
//! core with too few readings, user candidates in kPa, the parameters target, the exit code
//! for a core without a fit, bad input, and formula neutralisation in CSV.

#![allow(clippy::float_cmp)] // exact: values compared are the same printed numbers

mod common;

use std::fmt::Write as _;
use std::path::Path;

use common::{Scratch, porewise, stderr, stdout};
use porewise::model::retention::ModelKind;
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, Normal};

/// Lab suctions, cm.
const FULL_CM: [f64; 9] = [
    1.0, 10.0, 30.0, 100.0, 330.0, 1000.0, 3000.0, 8000.0, 15000.0,
];
/// A core read at five suctions only: one degree of freedom for four parameters.
const SHORT_CM: [f64; 5] = [1.0, 30.0, 330.0, 3000.0, 15000.0];
/// The default candidates, cm (the advice's documented lab steps).
const DEFAULT_CM: [f64; 11] = [
    1.0, 3.0, 10.0, 30.0, 60.0, 100.0, 330.0, 1000.0, 3000.0, 5000.0, 15300.0,
];

/// van Genuchten parameters of the generated cores (invented).
const CORES: [(&str, [f64; 4], bool); 4] = [
    ("S1", [0.07, 0.43, 0.036, 1.56], true),
    ("S2", [0.09, 0.45, 0.020, 1.40], true),
    ("@S3", [0.05, 0.40, 0.060, 1.90], true),
    ("S4", [0.08, 0.44, 0.030, 1.50], false),
];

fn lab_text() -> String {
    let mut rng = ChaCha8Rng::seed_from_u64(14);
    let noise = Normal::new(0.0, 0.004).expect("normal");
    let vg = ModelKind::VanGenuchten.curve();
    let mut text = String::from("site,top_cm,bottom_cm,sample,method,suction_cm,theta\n");
    for (code, p, full) in CORES {
        let suctions: &[f64] = if full { &FULL_CM } else { &SHORT_CM };
        for &h in suctions {
            let theta = vg.value(h, &p) + noise.sample(&mut rng);
            let method = if h <= 100.0 {
                "sandbox"
            } else {
                "pressure plate"
            };
            let _ = writeln!(text, "P,0,20,{code},{method},{h},{theta:.4}");
        }
    }
    text
}

fn campaign() -> Scratch {
    let s = Scratch::new();
    let lab = s.write("lab.csv", &lab_text());
    s.import_ok("lab", &[&lab]);
    run(&["fit", "--model", "van-genuchten"], &s.db).success();
    s
}

fn run(args: &[&str], db: &Path) -> assert_cmd::assert::Assert {
    porewise().arg(args[0]).arg(db).args(&args[1..]).assert()
}

fn csv_rows(text: &str) -> (csv::StringRecord, Vec<csv::StringRecord>) {
    let mut reader = csv::Reader::from_reader(text.as_bytes());
    let header = reader.headers().expect("header").clone();
    let rows = reader.records().collect::<Result<_, _>>().expect("rows");
    (header, rows)
}

fn col(header: &csv::StringRecord, name: &str) -> usize {
    header
        .iter()
        .position(|h| h == name)
        .unwrap_or_else(|| panic!("no column {name} in {header:?}"))
}

fn num(row: &csv::StringRecord, i: usize) -> f64 {
    row[i]
        .parse()
        .unwrap_or_else(|_| panic!("not a number: {:?}", &row[i]))
}

#[test]
fn the_ranking_lists_each_core_once_biggest_gain_first() {
    let s = campaign();
    let out = run(&["advise", "--format", "csv"], &s.db).success();
    let (h, rows) = csv_rows(&stdout(&out));
    assert_eq!(
        h.iter().collect::<Vec<_>>(),
        [
            "rank",
            "sample",
            "site",
            "top_cm",
            "bottom_cm",
            "model",
            "state",
            "suction_cm",
            "available_water_m3_m3",
            "aw_pm_now_m3_m3",
            "aw_pm_after_m3_m3",
            "shrink_pct",
            "noise_sd_m3_m3",
            "noise_from",
            "fit"
        ]
    );
    assert_eq!(rows.len(), 4);
    let (now, after) = (col(&h, "aw_pm_now_m3_m3"), col(&h, "aw_pm_after_m3_m3"));
    let gains: Vec<f64> = rows.iter().map(|r| num(r, now) - num(r, after)).collect();
    for pair in gains.windows(2) {
        assert!(pair[0] >= pair[1], "not biggest gain first: {gains:?}");
    }
    for (k, r) in rows.iter().enumerate() {
        assert_eq!(num(r, col(&h, "rank")), (k + 1) as f64);
        assert!(num(r, after) < num(r, now), "{r:?}");
        let shrink = num(r, col(&h, "shrink_pct"));
        let want = 100.0 * (num(r, now) - num(r, after)) / num(r, now);
        assert!((shrink - want).abs() < 1e-6 * want.abs().max(1.0), "{r:?}");
        let suction = num(r, col(&h, "suction_cm"));
        assert!(DEFAULT_CM.contains(&suction), "{suction} is not a lab step");
    }
    // The short core has one degree of freedom: its noise is the campaign's pooled noise of
    // its methods; the others use their own residual sd.
    let sample = col(&h, "sample");
    let from = col(&h, "noise_from");
    for r in &rows {
        let want = if &r[sample] == "S4" { "pooled" } else { "fit" };
        assert_eq!(&r[from], want, "{r:?}");
    }
    // A code that would start a spreadsheet formula is neutralised in CSV.
    assert!(rows.iter().any(|r| &r[sample] == "'@S3"), "{rows:?}");
    // The available water is the one `list fits` shows.
    let fits = s.list(&["fits", "--format", "csv"]);
    let (fh, frows) = csv_rows(&fits);
    for r in &rows {
        let f = frows
            .iter()
            .find(|f| f[col(&fh, "sample")] == r[sample])
            .expect("listed");
        let a = num(f, col(&fh, "available_water_m3_m3"));
        let b = num(r, col(&h, "available_water_m3_m3"));
        assert!((a - b).abs() < 1e-9, "{a} vs {b}");
    }
}

#[test]
fn the_chosen_step_is_the_best_of_every_listed_candidate() {
    let s = campaign();
    for target in ["available-water", "parameters"] {
        let out = run(
            &[
                "advise",
                "--target",
                target,
                "--every-step",
                "--format",
                "csv",
            ],
            &s.db,
        )
        .success();
        let (h, rows) = csv_rows(&stdout(&out));
        assert_eq!(rows.len(), 4 * DEFAULT_CM.len(), "{target}");
        let sample = col(&h, "sample");
        let chosen = col(&h, "chosen");
        let after = col(
            &h,
            if target == "parameters" {
                "param_pm_after_pct"
            } else {
                "aw_pm_after_m3_m3"
            },
        );
        for group in rows.chunks(DEFAULT_CM.len()) {
            assert!(group.iter().all(|r| r[sample] == group[0][sample]));
            let marked: Vec<&csv::StringRecord> =
                group.iter().filter(|r| &r[chosen] == "yes").collect();
            assert_eq!(marked.len(), 1, "{group:?}");
            let best = group
                .iter()
                .map(|r| num(r, after))
                .fold(f64::INFINITY, f64::min);
            assert_eq!(num(marked[0], after), best, "{target}: {group:?}");
            if target == "parameters" {
                // D-optimality: the chosen step has the largest determinant ratio.
                let det = col(&h, "det_ratio");
                let top = group
                    .iter()
                    .map(|r| num(r, det))
                    .fold(f64::NEG_INFINITY, f64::max);
                assert_eq!(num(marked[0], det), top);
                assert!(top > 1.0);
            }
        }
    }
}

#[test]
fn candidates_in_kpa_and_the_listing_units() {
    let s = campaign();
    let out = run(
        &[
            "advise",
            "--candidates-kpa",
            "10,33,1500",
            "--units",
            "kpa",
            "--format",
            "json",
        ],
        &s.db,
    )
    .success();
    let json: serde_json::Value = serde_json::from_str(&stdout(&out)).expect("json");
    let rows = json.as_array().expect("array");
    assert_eq!(rows.len(), 4);
    for r in rows {
        let kpa = r["suction_kpa"].as_f64().expect("number");
        assert!(
            [10.0, 33.0, 1500.0]
                .iter()
                .any(|c| (kpa - c).abs() < 1e-9 * c),
            "{kpa}"
        );
    }
    let bad = run(&["advise", "--candidates-kpa", "33,-5"], &s.db).code(1);
    assert!(
        stderr(&bad).contains("--candidates-kpa: -5 kPa: expected a suction from 0 to"),
        "{}",
        stderr(&bad)
    );
    run(&["advise", "--candidates-kpa", "x"], &s.db).code(2);
    let unknown = run(&["advise", "--sample", "NOPE"], &s.db).code(1);
    assert!(
        stderr(&unknown).contains("no sample \"NOPE\""),
        "{}",
        stderr(&unknown)
    );
}

#[test]
fn a_core_without_a_fit_is_named_and_the_exit_code_says_so() {
    let s = campaign();
    let more = s.write(
        "more.csv",
        "site,top_cm,bottom_cm,sample,method,suction_cm,theta\n\
         P,0,20,S5,sandbox,10,0.40\nP,0,20,S5,pressure plate,330,0.25\n",
    );
    s.import_ok("lab", &[&more]);
    let out = run(&["advise"], &s.db).code(3);
    let err = stderr(&out);
    assert!(
        err.contains("sample S5: no advice: no current fit"),
        "{err}"
    );
    assert!(err.contains("1 sample without advice"), "{err}");
    let table = stdout(&out);
    assert!(table.starts_with("rank  sample"), "{table}");
    assert_eq!(table.lines().count(), 5, "{table}");
    // One named core with a fit: exit 0, one row.
    let one = run(&["advise", "--sample", "S1"], &s.db).success();
    assert_eq!(stdout(&one).lines().count(), 2);
}
