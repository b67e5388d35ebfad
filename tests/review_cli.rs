//! The outlier review through the binary: the stored queue, accept / dismiss, manual flags and
//! unflag with refits, the audit trail, stale fits, `fit --input --flag-outliers`, and the
//! demo's planted readings.

mod common;

use std::fmt::Write as _;
use std::path::Path;

use common::{Scratch, porewise, stderr, stdout};
use porewise::model::retention::ModelKind;
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, Normal};

/// Lab suctions, cm.
const SUCTIONS_CM: [f64; 10] = [
    1.0, 10.0, 30.0, 60.0, 100.0, 330.0, 1000.0, 3000.0, 8000.0, 15000.0,
];

/// van Genuchten parameters of the generated cores (theta_r, theta_s, alpha, n; invented).
const CORES: [[f64; 4]; 6] = [
    [0.07, 0.43, 0.036, 1.56],
    [0.06, 0.41, 0.070, 1.80],
    [0.09, 0.45, 0.020, 1.40],
    [0.08, 0.44, 0.030, 1.50],
    [0.05, 0.40, 0.060, 1.90],
    [0.10, 0.47, 0.015, 1.35],
];

/// The planted bad reading: core S3 at 3000 cm, 0.10 too wet.
const BAD_SAMPLE: &str = "S3";
const BAD_H: f64 = 3000.0;

/// A lab file of six cores with seeded noise (sd 0.005) and one planted bad reading.
fn lab_text() -> String {
    let mut rng = ChaCha8Rng::seed_from_u64(7);
    let noise = Normal::new(0.0, 0.005).expect("normal");
    let vg = ModelKind::VanGenuchten.curve();
    let mut text = String::from("site,top_cm,bottom_cm,sample,method,suction_cm,theta\n");
    for (k, p) in CORES.iter().enumerate() {
        let code = format!("S{}", k + 1);
        for &h in &SUCTIONS_CM {
            let mut theta = vg.value(h, p) + noise.sample(&mut rng);
            if code == BAD_SAMPLE && (h - BAD_H).abs() < 1e-9 {
                theta += 0.10;
            }
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

/// The reading id of a sample's reading at a suction.
fn reading_id(s: &Scratch, sample: &str, h: f64) -> i64 {
    s.connect()
        .query_row(
            "SELECT r.id FROM reading r JOIN sample m ON m.id = r.sample_id
             WHERE m.code = ?1 AND abs(r.h_cm - ?2) < 1e-6",
            rusqlite::params![sample, h],
            |r| r.get(0),
        )
        .expect("reading")
}

/// The state word (`current`, `stale`, ...) and `n_points` of `list fits` for one sample.
fn fit_state(s: &Scratch, sample: &str) -> (String, String) {
    let (header, rows) = csv_rows(&s.list(&["fits", "--sample", sample, "--format", "csv"]));
    let row = &rows[0];
    (
        row[col(&header, "state")]
            .split_whitespace()
            .next()
            .unwrap_or_default()
            .to_string(),
        row[col(&header, "n_points")].to_string(),
    )
}

#[test]
fn review_stores_the_planted_reading_worst_first_and_the_queue_survives() {
    let s = campaign();
    run(&["fit"], &s.db).success();
    let out = run(&["review", "--format", "csv"], &s.db).success();
    let (header, rows) = csv_rows(&stdout(&out));
    assert!(!rows.is_empty(), "nothing suggested");
    let bad = reading_id(&s, BAD_SAMPLE, BAD_H);
    assert_eq!(rows[0][col(&header, "reading")], bad.to_string());
    assert_eq!(&rows[0][col(&header, "sample")], BAD_SAMPLE);
    assert_eq!(&rows[0][col(&header, "suction_cm")], "3000");
    assert!(rows[0][col(&header, "reason")].contains("m3/m3"));
    // Worst first.
    let scores: Vec<f64> = rows
        .iter()
        .map(|r| r[col(&header, "score")].parse().expect("score"))
        .collect();
    assert!(scores.windows(2).all(|w| w[0] >= w[1]), "{scores:?}");
    // Clean readings are left alone (60 readings, one planted).
    assert!(rows.len() <= 2, "{} suggested", rows.len());
    // A second refresh raises nothing new, and the stored queue is the same without a refresh.
    let flags_before = s.count("flag");
    run(&["review"], &s.db).success();
    assert_eq!(s.count("flag"), flags_before);
    let again = run(&["review", "--no-refresh", "--format", "csv"], &s.db).success();
    assert_eq!(csv_rows(&stdout(&again)).1, rows);
    // Other units: kPa.
    let kpa = run(
        &[
            "review",
            "--no-refresh",
            "--units",
            "kpa",
            "--format",
            "csv",
        ],
        &s.db,
    )
    .success();
    let (kh, krows) = csv_rows(&stdout(&kpa));
    let v: f64 = krows[0][col(&kh, "suction_kpa")].parse().expect("kpa");
    assert!((v - 3000.0 / 10.197_162_13).abs() < 1e-6, "{v}");
    // The readings listing shows the state.
    let (rh, rrows) = csv_rows(&s.list(&["readings", "--sample", BAD_SAMPLE, "--format", "csv"]));
    let marked: Vec<&str> = rrows
        .iter()
        .filter(|r| r[col(&rh, "reading")] == bad.to_string())
        .map(|r| &r[col(&rh, "flag")])
        .collect();
    assert_eq!(marked, ["suggested"]);
}

#[test]
fn accept_all_leaves_the_reading_out_and_refits_its_sample() {
    let s = campaign();
    run(&["fit"], &s.db).success();
    assert_eq!(fit_state(&s, BAD_SAMPLE), ("current".into(), "10".into()));
    let out = run(
        &["review", "--accept-all", "--note", "plate contact"],
        &s.db,
    )
    .success();
    assert!(stderr(&out).contains("accepted"), "{}", stderr(&out));
    assert_eq!(fit_state(&s, BAD_SAMPLE), ("current".into(), "9".into()));
    let (rh, rrows) = csv_rows(&s.list(&["readings", "--sample", BAD_SAMPLE, "--format", "csv"]));
    let bad = reading_id(&s, BAD_SAMPLE, BAD_H).to_string();
    let row = rrows
        .iter()
        .find(|r| r[col(&rh, "reading")] == bad)
        .expect("row");
    assert_eq!(&row[col(&rh, "flag")], "excluded");
    // Nothing left in the queue for it; the refreshed queue does not raise it again.
    let q = run(&["review", "--format", "csv"], &s.db).success();
    let (qh, qrows) = csv_rows(&stdout(&q));
    assert!(qrows.iter().all(|r| r[col(&qh, "reading")] != bad));
}

#[test]
fn flag_unflag_and_refit_round_trip_with_stale_fits_and_the_audit_trail() {
    let s = campaign();
    run(&["fit"], &s.db).success();
    let id = reading_id(&s, "S1", 330.0);
    let ids = id.to_string();
    run(
        &[
            "flag",
            &ids,
            "--reason",
            "core cracked",
            "--note",
            "photo 14",
        ],
        &s.db,
    )
    .success();
    // The flag makes the fit stale at once, and a refit leaves the reading out.
    assert_eq!(fit_state(&s, "S1"), ("stale".into(), "10".into()));
    assert_eq!(fit_state(&s, "S2").0, "current");
    run(&["fit", "--sample", "S1"], &s.db).success();
    assert_eq!(fit_state(&s, "S1"), ("current".into(), "9".into()));
    // Flagging twice is refused; unflag takes it back, and the fit is stale again.
    let twice = run(&["flag", &ids, "--reason", "again"], &s.db).failure();
    assert!(
        stderr(&twice).contains("already flagged"),
        "{}",
        stderr(&twice)
    );
    run(&["unflag", &ids, "--note", "crack was on the ring"], &s.db).success();
    assert_eq!(fit_state(&s, "S1").0, "stale");
    run(&["fit", "--sample", "S1"], &s.db).success();
    assert_eq!(fit_state(&s, "S1"), ("current".into(), "10".into()));
    let again = run(&["unflag", &ids], &s.db).failure();
    assert!(stderr(&again).contains("not flagged"), "{}", stderr(&again));
    // The audit trail keeps both steps with who, when and the notes; nothing was deleted.
    let (h, rows) = csv_rows(&s.list(&["flag-events", "--sample", "S1", "--format", "csv"]));
    let steps: Vec<(String, String, String, String)> = rows
        .iter()
        .map(|r| {
            (
                r[col(&h, "from")].to_string(),
                r[col(&h, "to")].to_string(),
                r[col(&h, "by")].to_string(),
                r[col(&h, "note")].to_string(),
            )
        })
        .collect();
    assert_eq!(
        steps,
        [
            (
                String::new(),
                "accepted".into(),
                "user".into(),
                "photo 14".into()
            ),
            (
                "accepted".into(),
                "cleared".into(),
                "user".into(),
                "crack was on the ring".into()
            ),
        ]
    );
    let times: Vec<chrono::DateTime<chrono::FixedOffset>> = rows
        .iter()
        .map(|r| chrono::DateTime::parse_from_rfc3339(&r[col(&h, "at")]).expect("time"))
        .collect();
    assert!(times[0] <= times[1]);
    let (fh, frows) = csv_rows(&s.list(&["flags", "--sample", "S1", "--format", "csv"]));
    assert_eq!(frows.len(), 1);
    assert_eq!(&frows[0][col(&fh, "status")], "cleared");
    assert_eq!(&frows[0][col(&fh, "reason")], "core cracked");
    assert!(!frows[0][col(&fh, "decided_at")].is_empty());
}

#[test]
fn a_dismissed_suggestion_stays_dismissed_and_is_not_raised_again() {
    let s = campaign();
    run(&["fit"], &s.db).success();
    run(&["review"], &s.db).success();
    let bad = reading_id(&s, BAD_SAMPLE, BAD_H).to_string();
    let out = run(
        &["review", "--dismiss", &bad, "--note", "checked the sheet"],
        &s.db,
    )
    .success();
    assert!(
        stdout(&out).contains("dismissed 1 suggestion"),
        "{}",
        stdout(&out)
    );
    // Still current: dismissing changes nothing the fit uses.
    assert_eq!(fit_state(&s, BAD_SAMPLE).0, "current");
    let q = run(&["review", "--format", "csv"], &s.db).success();
    let (qh, qrows) = csv_rows(&stdout(&q));
    assert!(qrows.iter().all(|r| r[col(&qh, "reading")] != bad));
    let (fh, frows) = csv_rows(&s.list(&["flags", "--sample", BAD_SAMPLE, "--format", "csv"]));
    let flag = frows
        .iter()
        .find(|r| r[col(&fh, "reading")] == bad)
        .map(|r| r[col(&fh, "flag")].to_string())
        .expect("flag of the bad reading");
    let (h, rows) = csv_rows(&s.list(&["flag-events", "--sample", BAD_SAMPLE, "--format", "csv"]));
    let trail: Vec<&csv::StringRecord> =
        rows.iter().filter(|r| r[col(&h, "flag")] == flag).collect();
    assert_eq!(trail.len(), 2, "{trail:?}");
    assert_eq!(
        (&trail[0][col(&h, "to")], &trail[0][col(&h, "by")]),
        ("suggested", "checks")
    );
    let last = trail[1];
    assert_eq!(
        (
            &last[col(&h, "from")],
            &last[col(&h, "to")],
            &last[col(&h, "by")]
        ),
        ("suggested", "dismissed", "user")
    );
    assert_eq!(&last[col(&h, "note")], "checked the sheet");
    // Deciding a reading without an open suggestion is an error that changes nothing.
    let events = s.count("flag_event");
    let refused = run(&["review", "--accept", &bad], &s.db).failure();
    assert!(
        stderr(&refused).contains("no open suggestion"),
        "{}",
        stderr(&refused)
    );
    assert_eq!(s.count("flag_event"), events);
    let unknown = run(&["flag", "999999", "--reason", "x"], &s.db).failure();
    assert!(stderr(&unknown).contains("999999"), "{}", stderr(&unknown));
}

#[test]
fn fit_input_flag_outliers_names_the_physical_lines() {
    let s = Scratch::new();
    // Two cores; a blank line and a quoted note with a line break move physical lines away
    // from record numbers. The bad reading is on physical line 17.
    let vg = ModelKind::VanGenuchten.curve();
    let mut text = String::from("sample,suction_cm,theta,notes\n");
    let mut line = 1;
    let mut bad_line = 0;
    for (k, p) in CORES[..2].iter().enumerate() {
        for (j, &h) in SUCTIONS_CM.iter().enumerate() {
            let mut theta = vg.value(h, p);
            let mut note = String::new();
            if k == 0 && j == 2 {
                note = "\"two\nlines\"".to_string();
            }
            if k == 1 && j == 3 {
                theta -= 0.12;
            }
            let _ = writeln!(text, "core-{k},{h},{theta:.4},{note}");
            line += 1;
            if k == 1 && j == 3 {
                bad_line = line;
            }
            if note.contains('\n') {
                line += 1;
            }
        }
        if k == 0 {
            text.push('\n');
            line += 1;
        }
    }
    assert_eq!(bad_line, 17);
    let input = s.write("pairs.csv", &text);
    let flags = s.dir.path().join("suspects.csv");
    let fits = s.dir.path().join("fits.csv");
    porewise()
        .args([
            "fit",
            "--input",
            &input,
            "--flag-outliers",
            "--flags-output",
        ])
        .arg(&flags)
        .arg("--output")
        .arg(&fits)
        .assert()
        .success();
    let (h, rows) = csv_rows(&std::fs::read_to_string(&flags).expect("flags file"));
    assert_eq!(
        h.iter().collect::<Vec<_>>(),
        ["sample", "line", "suction_cm", "theta", "reason", "score"]
    );
    assert_eq!(rows.len(), 1, "{rows:?}");
    assert_eq!(&rows[0][0], "core-1");
    assert_eq!(rows[0][1].parse::<usize>().expect("line"), bad_line);
    assert_eq!(&rows[0][2], "60");
    assert!(rows[0][5].parse::<f64>().expect("score") > 3.5);
    // The fit of core-1 used nine readings, core-0 all ten.
    let (fh, frows) = csv_rows(&std::fs::read_to_string(&fits).expect("fits file"));
    let n: Vec<&str> = frows.iter().map(|r| &r[col(&fh, "n_points")]).collect();
    assert_eq!(n, ["10", "9"]);
    // Without --flags-output the suspects go to stderr as FILE:LINE.
    let out = porewise()
        .args(["fit", "--input", &input, "--flag-outliers"])
        .assert()
        .success();
    assert!(
        stderr(&out).contains(&format!("pairs.csv:{bad_line}: sample core-1")),
        "{}",
        stderr(&out)
    );
}

#[test]
fn the_demo_waits_with_its_planted_readings_in_the_queue() {
    let tmp = tempfile::tempdir().expect("temp dir");
    let src = Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-db");
    for file in porewise::demo::generate() {
        std::fs::copy(src.join(file.name), tmp.path().join(file.name)).expect("copy");
    }
    porewise()
        .args(["demo", "--no-ui", "--dir"])
        .arg(tmp.path())
        .assert()
        .success();
    let db = tmp.path().join("demo.sqlite");
    let out = run(&["review", "--no-refresh", "--format", "csv"], &db).success();
    let (h, rows) = csv_rows(&stdout(&out));
    // The logger season's quality marks wait beside the readings (demo-db/README.md, "Planted
    // logger problems"): rows without a sample, naming their logger record.
    let (readings, records): (Vec<_>, Vec<_>) =
        rows.iter().partition(|r| !r[col(&h, "sample")].is_empty());
    assert!(
        !records.is_empty()
            && records
                .iter()
                .all(|r| !r[col(&h, "logger_record")].is_empty() && &r[col(&h, "site")] == "TER1"),
        "{records:?}"
    );
    let queued: Vec<(String, f64)> = readings
        .iter()
        .map(|r| {
            (
                r[col(&h, "sample")].to_string(),
                r[col(&h, "suction_cm")].parse().expect("suction"),
            )
        })
        .collect();
    // demo-db/README.md, "Planted bad readings" (suctions converted to cm: 1 kPa =
    // 10.19716213 cm, 1 hPa = 1.019716213 cm, pF 1.8 = 10^1.8 cm).
    let planted = [
        ("LEV1-C2-b", 1500.0 * 10.197_162_13),
        ("TER1-A-a", 2.0 * 10.197_162_13),
        ("BSW1-Bg1-b", 5000.0 * 1.019_716_213),
        ("BSW1-Bg1-b", 15000.0 * 1.019_716_213),
        ("BAS1-Bw-a", 10f64.powf(1.8)),
    ];
    for (sample, h) in planted {
        assert!(
            queued
                .iter()
                .any(|(s, q)| s == sample && (q - h).abs() < 1e-3 * h),
            "{sample} at {h} cm not in the queue: {queued:?}"
        );
    }
}
