//! The committed demo source files are exactly what the seeded generator writes.

use std::path::Path;

use porewise::demo::logger::{SPIKE, STUCK};

#[test]
fn committed_demo_files_match_the_generator() {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-db");
    for file in porewise::demo::generate() {
        let committed = std::fs::read_to_string(dir.join(file.name))
            .unwrap_or_else(|e| panic!("demo-db/{} is missing: {e}", file.name));
        assert!(
            committed == file.text,
            "demo-db/{} differs from the generator; run `cargo run -- demo --write-sources`",
            file.name
        );
    }
}

/// Copy the committed demo sources into a fresh folder.
fn fresh_demo_dir() -> tempfile::TempDir {
    let tmp = tempfile::tempdir().expect("temp dir");
    let src = Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-db");
    for file in porewise::demo::generate() {
        std::fs::copy(src.join(file.name), tmp.path().join(file.name)).expect("copy");
    }
    tmp
}

#[test]
fn demo_builds_from_scratch_and_a_second_run_reuses_it() {
    let tmp = fresh_demo_dir();
    let run = || {
        assert_cmd::Command::cargo_bin("porewise")
            .expect("binary")
            .args(["demo", "--no-ui", "--dir"])
            .arg(tmp.path())
            .assert()
            .success()
    };
    let first = run();
    let stderr = String::from_utf8_lossy(&first.get_output().stderr).into_owned();
    assert!(stderr.contains("building"), "{stderr}");
    // The build ends with the campaign's top advice: a lab core and a suction to measure.
    let advice = stderr
        .lines()
        .find(|l| l.starts_with("advice: one more reading pays most on "))
        .unwrap_or_else(|| panic!("no advice line: {stderr}"));
    assert!(
        advice.contains(" cm would take its available water ±")
            && advice.contains("porewise advise"),
        "{advice}"
    );
    let file = tmp.path().join("demo.sqlite");
    let campaign = porewise::store::Campaign::open(&file).expect("opens");
    let counts = porewise::store::overview::counts(campaign.connection()).expect("counts");
    // 14 layers with two lab cores each, a third core with four readings (TER1-A-c), a layer
    // with texture and no core (BAS1:90-130), and a field pairing at each logged depth.
    assert_eq!((counts.sites, counts.layers, counts.samples), (4, 15, 31));
    let conn = campaign.connection();
    let one = |sql: &str| -> i64 { conn.query_row(sql, [], |r| r.get(0)).expect(sql) };
    // Every generated lab row became a reading; the rest are the field pairings' readings.
    let lab_rows: usize = porewise::demo::generate()
        .iter()
        .filter(|f| f.name.starts_with("lab-"))
        .map(|f| f.text.lines().count() - 1)
        .sum();
    let field = one(
        "SELECT count(*) FROM reading r JOIN sample m ON m.id = r.sample_id
         WHERE m.kind = 'field_pairing' AND r.method = 'field pairing'",
    );
    assert_eq!(counts.readings, lab_rows as u64 + field as u64);
    // Each logged depth is paired into its layer, with both branches (demo-db/README.md).
    let mut stmt = conn
        .prepare(
            "SELECT m.code, l.top_cm, l.bottom_cm,
                 sum(r.branch = 'drying'), sum(r.branch = 'wetting')
             FROM sample m JOIN layer l ON l.id = m.layer_id
             JOIN reading r ON r.sample_id = m.id
             WHERE m.kind = 'field_pairing' GROUP BY m.id ORDER BY m.code",
        )
        .expect("prepare");
    let pairings: Vec<(String, f64, f64, i64, i64)> = stmt
        .query_map([], |r| {
            Ok((r.get(0)?, r.get(1)?, r.get(2)?, r.get(3)?, r.get(4)?))
        })
        .expect("query")
        .collect::<Result<_, _>>()
        .expect("rows");
    drop(stmt);
    assert_eq!(pairings.len(), 2, "{pairings:?}");
    assert_eq!(
        (pairings[0].0.as_str(), pairings[0].1, pairings[0].2),
        ("TER1-field-15cm", 0.0, 25.0)
    );
    assert_eq!(
        (pairings[1].0.as_str(), pairings[1].1, pairings[1].2),
        ("TER1-field-45cm", 25.0, 60.0)
    );
    assert!(
        pairings.iter().all(|p| p.3 >= 5 && p.4 >= 3),
        "drying and wetting points at both depths: {pairings:?}"
    );
    // The logger season: four sensors, hourly, every record stored.
    assert_eq!(
        one("SELECT count(*) FROM logger_record"),
        4 * porewise::demo::logger::RECORDS as i64
    );
    // The planted problems are marked (and only they): the spike, the stuck stretch and the
    // dry spell past the shallow tensiometer's working range.
    let marks = |prefix: &str, sensor: &str| {
        one(&format!(
            "SELECT count(*) FROM flag f JOIN logger_view g ON g.id = f.logger_record_id
             WHERE f.status = 'suggested' AND f.reason LIKE '{prefix}%' AND g.sensor_id = '{sensor}'"
        ))
    };
    assert_eq!(marks("spike", SPIKE.sensor), 1);
    let stuck = marks("stuck", STUCK.sensor);
    assert!(
        (STUCK.records as i64..=STUCK.records as i64 + 2).contains(&stuck),
        "{stuck}"
    );
    let beyond = marks("tensiometer beyond", "T15");
    assert!((15..=80).contains(&beyond), "{beyond}");
    assert_eq!(
        one("SELECT count(*) FROM flag WHERE logger_record_id IS NOT NULL"),
        1 + stuck + beyond
    );
    drop(campaign);

    let second = run();
    let stderr = String::from_utf8_lossy(&second.get_output().stderr).into_owned();
    assert!(!stderr.contains("building"), "second run rebuilt: {stderr}");
}

#[test]
fn the_terrace_cores_are_fitted_with_their_measured_conductivity() {
    let tmp = fresh_demo_dir();
    assert_cmd::Command::cargo_bin("porewise")
        .expect("binary")
        .args(["demo", "--no-ui", "--dir"])
        .arg(tmp.path())
        .assert()
        .success();
    let campaign = porewise::store::Campaign::open(&tmp.path().join("demo.sqlite")).expect("opens");
    let conn = campaign.connection();
    let rows = porewise::store::conductivity::joint_fits(conn, porewise::store::Filter::default())
        .expect("joint fits");
    // Six TER1 cores, each with its joint fit current and its K readings all used.
    assert_eq!(rows.len(), 6);
    for row in &rows {
        assert_eq!(row.site, "TER1");
        assert!(row.current, "{}", row.sample);
        let r = &row.record.report;
        assert!(r.fit.converged, "{}: {:?}", row.sample, r.fit.message);
        assert!((7..=10).contains(&r.conductivity.n), "{}", row.sample);
        assert_eq!(row.record.conductivity_reading_ids.len(), r.conductivity.n);
    }
    let k_rows = porewise::demo::generate()
        .iter()
        .find(|f| f.name == porewise::demo::conductivity::FILE)
        .map(|f| f.text.lines().count() - 1)
        .expect("conductivity file");
    let stored: i64 = conn
        .query_row("SELECT count(*) FROM conductivity_reading", [], |r| {
            r.get(0)
        })
        .expect("count");
    assert_eq!(stored as usize, k_rows);
}
