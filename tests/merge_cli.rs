//! `porewise merge` through the real binary: two laptops' copies of the demo campaign merged
//! both ways to the same content, every kind of conflict with its exact report, idempotence,
//! dry runs and refusals that write nothing, staleness of merged fits, and `kill -9` during a
//! merge.

mod common;

use std::fmt::Write as _;
use std::path::{Path, PathBuf};
use std::sync::OnceLock;
use std::time::Instant;

use common::{porewise, stderr, stdout};
use porewise::store::exchange;
use porewise::store::fits::{FitState, Selection, samples, summaries};
use rusqlite::Connection;

/// The demo campaign, built once per test run (under target/, like the TUI tests).
fn built_demo() -> &'static Path {
    static DEMO: OnceLock<PathBuf> = OnceLock::new();
    DEMO.get_or_init(|| {
        let dir = Path::new("target/tmp/merge-demo");
        let _ = std::fs::remove_dir_all(dir);
        std::fs::create_dir_all(dir).expect("build folder");
        let src = Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-db");
        for file in porewise::demo::generate() {
            std::fs::copy(src.join(file.name), dir.join(file.name)).expect("copy");
        }
        let built = porewise::cli::demo::ensure_built(dir).expect("demo builds");
        std::fs::canonicalize(built).expect("absolute path")
    })
}

/// Two laptops' copies of the demo campaign in a fresh folder.
struct Laptops {
    dir: tempfile::TempDir,
    a: PathBuf,
    b: PathBuf,
}

fn laptops() -> Laptops {
    let dir = tempfile::tempdir().expect("temp dir");
    let a = dir.path().join("a.sqlite");
    let b = dir.path().join("b.sqlite");
    std::fs::copy(built_demo(), &a).expect("copy a");
    std::fs::copy(built_demo(), &b).expect("copy b");
    Laptops { dir, a, b }
}

fn sql(db: &Path, text: &str) {
    Connection::open(db)
        .expect("open")
        .execute_batch(text)
        .expect("edit");
}

fn one<T: rusqlite::types::FromSql>(db: &Path, query: &str) -> T {
    Connection::open(db)
        .expect("open")
        .query_row(query, [], |r| r.get(0))
        .expect("query")
}

fn rows_of(db: &Path) -> exchange::CampaignRows {
    exchange::read(&Connection::open(db).expect("open")).expect("read")
}

fn content(db: &Path) -> String {
    exchange::fingerprint(&rows_of(db))
}

fn merge(into: &Path, from: &Path, extra: &[&str]) -> assert_cmd::assert::Assert {
    porewise()
        .arg("merge")
        .arg(into)
        .arg(from)
        .args(extra)
        .assert()
}

/// Standing of every sample's current fit, by sample code.
fn standing(db: &Path) -> Vec<(String, String)> {
    let conn = Connection::open(db).expect("open");
    let list = samples(&conn, &Selection::all()).expect("samples");
    let map = summaries(&conn, &list).expect("summaries");
    let mut out: Vec<(String, String)> = list
        .iter()
        .map(|s| {
            let state = match &map[&s.id].state {
                FitState::Current => "current".to_string(),
                other => format!("{other:?}"),
            };
            (s.code.clone(), state)
        })
        .collect();
    out.sort();
    out
}

/// A sites file and a lab sheet for one laptop's new site `code` (invented values).
fn new_site(dir: &Path, code: &str, theta_shift: f64) -> (String, String) {
    let sites = dir.join(format!("sites-{code}.csv"));
    std::fs::write(
        &sites,
        format!("site,name,latitude,longitude,elevation_m,notes\n{code},New site {code},0.02,0.03,15.0,\n"),
    )
    .expect("write sites");
    let lab = dir.join(format!("lab-{code}.csv"));
    let mut text =
        String::from("site,top_cm,bottom_cm,sample,method,suction_kpa,theta,measured_on,notes\n");
    for (kpa, theta) in [
        (0.0, 0.44),
        (1.0, 0.41),
        (3.0, 0.37),
        (10.0, 0.31),
        (33.0, 0.26),
        (100.0, 0.21),
        (1500.0, 0.12),
    ] {
        writeln!(
            text,
            "{code},0,20,{code}-a,pressure plate,{kpa},{:.4},2026-06-10,",
            theta + theta_shift
        )
        .expect("write to a string");
    }
    std::fs::write(&lab, text).expect("write lab");
    (sites.display().to_string(), lab.display().to_string())
}

fn import(db: &Path, kind: &str, file: &str) {
    porewise()
        .args(["import", kind])
        .arg(db)
        .arg(file)
        .assert()
        .success();
}

/// Each laptop's edits: a site of its own with a fitted core, a changed reading, a flag
/// decided differently, another current fit, a layer attribute changed differently.
fn edit_both(l: &Laptops) {
    let (s, lab) = new_site(l.dir.path(), "NA1", 0.0);
    import(&l.a, "sites", &s);
    import(&l.a, "lab", &lab);
    porewise()
        .arg("fit")
        .arg(&l.a)
        .args(["--sample", "NA1-a"])
        .assert()
        .success();
    let (s, lab) = new_site(l.dir.path(), "NB1", 0.01);
    import(&l.b, "sites", &s);
    import(&l.b, "lab", &lab);
    porewise()
        .arg("fit")
        .arg(&l.b)
        .args(["--sample", "NB1-a"])
        .assert()
        .success();
    // The same reading corrected differently.
    sql(&l.a, "UPDATE reading SET theta = 0.2501 WHERE id = 20");
    sql(&l.b, "UPDATE reading SET theta = 0.2502 WHERE id = 20");
    // The same suggested flag decided differently, at different times.
    sql(
        &l.a,
        "UPDATE flag SET status = 'accepted', decided_at = '2026-07-01T09:00:00Z',
                decided_by = 'user', note = 'probe moved' WHERE id = 1",
    );
    sql(
        &l.b,
        "UPDATE flag SET status = 'dismissed', decided_at = '2026-07-02T09:00:00Z',
                decided_by = 'user', note = 'looks fine' WHERE id = 1",
    );
    // Laptop B makes the older fit of sample 9 current again.
    sql(
        &l.b,
        "UPDATE fit SET is_current = 0 WHERE sample_id = 9;
         UPDATE fit SET is_current = 1 WHERE id = (SELECT min(id) FROM fit WHERE sample_id = 9)",
    );
    // A layer's horizon named differently.
    sql(&l.a, "UPDATE layer SET horizon = 'Ap1' WHERE id = 1");
    sql(&l.b, "UPDATE layer SET horizon = 'Ap2' WHERE id = 1");
}

#[test]
fn two_laptops_merged_either_way_give_the_same_campaign() {
    let l = laptops();
    edit_both(&l);
    let a2 = l.dir.path().join("a2.sqlite");
    let b2 = l.dir.path().join("b2.sqlite");
    std::fs::copy(&l.a, &a2).expect("copy");
    std::fs::copy(&l.b, &b2).expect("copy");
    // A <- B keeping A's versions; B <- A taking A's: the same choices. Flags by decision
    // time, which does not depend on the direction.
    merge(&a2, &l.b, &["--prefer", "into", "--prefer", "flags=newer"]).success();
    merge(&b2, &l.a, &["--prefer", "from", "--prefer", "flags=newer"]).success();
    assert_eq!(content(&a2), content(&b2));
    assert_eq!(standing(&a2), standing(&b2));
    let merged = rows_of(&a2);
    // Both new sites, both laptops' decisions in the flag's trail, the later one standing.
    let codes: Vec<&str> = merged.sites.iter().map(|s| s.code.as_str()).collect();
    assert!(
        codes.contains(&"NA1") && codes.contains(&"NB1"),
        "{codes:?}"
    );
    let flag_uid: String = one(&l.a, "SELECT uid FROM flag WHERE id = 1");
    let flag = merged
        .flags
        .iter()
        .find(|f| f.uid == flag_uid)
        .expect("flag");
    assert_eq!(flag.status, "dismissed");
    let trail: Vec<(&str, &str)> = merged
        .flag_events
        .iter()
        .filter(|e| e.flag_uid == flag_uid)
        .map(|e| (e.at.as_str(), e.to_status.as_str()))
        .collect();
    assert_eq!(trail.len(), 3, "{trail:?}");
    assert!(
        trail.contains(&("2026-07-01T09:00:00Z", "accepted")),
        "{trail:?}"
    );
    assert!(
        trail.contains(&("2026-07-02T09:00:00Z", "dismissed")),
        "{trail:?}"
    );
    assert_eq!(trail.iter().filter(|(_, s)| *s == "suggested").count(), 1);
    // Each audit event once in the file (no event made by a trigger during the copy).
    let events: i64 = one(&a2, "SELECT count(*) FROM flag_event");
    assert_eq!(
        usize::try_from(events).expect("count"),
        merged.flag_events.len()
    );
    let reading: f64 = one(&a2, "SELECT theta FROM reading WHERE id = 20");
    assert!((reading - 0.2501).abs() < 1e-12);
    // The new sites' fits came along current, and stay so (their readings are the same).
    let standing = standing(&a2);
    for code in ["NA1-a", "NB1-a"] {
        let s = standing.iter().find(|(c, _)| c == code).expect("sample");
        assert_eq!(s.1, "current", "{standing:?}");
    }
}

#[test]
fn every_kind_of_conflict_is_listed_exactly_and_nothing_is_written() {
    let l = laptops();
    sql(&l.a, "UPDATE reading SET theta = 0.2501 WHERE id = 20");
    sql(&l.b, "UPDATE reading SET theta = 0.2502 WHERE id = 20");
    sql(
        &l.a,
        "UPDATE flag SET status = 'accepted', decided_at = '2026-07-01T09:00:00Z',
                decided_by = 'user' WHERE id = 1",
    );
    sql(
        &l.b,
        "UPDATE flag SET status = 'dismissed', decided_at = '2026-07-02T09:00:00Z',
                decided_by = 'user' WHERE id = 1",
    );
    sql(
        &l.b,
        "UPDATE fit SET is_current = 0 WHERE sample_id = 9;
         UPDATE fit SET is_current = 1 WHERE id = (SELECT min(id) FROM fit WHERE sample_id = 9)",
    );
    sql(&l.a, "UPDATE layer SET horizon = 'Ap1' WHERE id = 1");
    sql(&l.b, "UPDATE layer SET horizon = 'Ap2' WHERE id = 1");
    sql(&l.b, "UPDATE site SET elevation_m = 15.5 WHERE id = 2");
    // Two laptops each made a site S9 (different uids), a layer 200-220 cm at the first
    // site and a sample S9-a in it.
    for (db, n) in [(&l.a, 1), (&l.b, 2)] {
        sql(
            db,
            &format!(
                "INSERT INTO site (uid, code) VALUES ('00000000-0000-4000-8000-00000000000{n}', 'S9');
                 INSERT INTO layer (uid, site_id, top_cm, bottom_cm) VALUES
                    ('00000000-0000-4000-8000-00000000001{n}', 1, 200, 220);
                 INSERT INTO sample (uid, layer_id, code, kind) VALUES
                    ('00000000-0000-4000-8000-00000000002{n}',
                     (SELECT id FROM layer WHERE uid = '00000000-0000-4000-8000-00000000001{n}'),
                     'S9-a', 'lab_core');"
            ),
        );
    }
    let first_site: String = one(&l.a, "SELECT code FROM site WHERE id = 1");
    let before = std::fs::read(&l.a).expect("bytes");
    let out = merge(&l.a, &l.b, &[]).code(1);
    let uid = |q: &str| -> String { one(&l.a, q) };
    let reading = uid("SELECT uid FROM reading WHERE id = 20");
    let reading_sample =
        uid("SELECT m.code FROM reading r JOIN sample m ON m.id = r.sample_id WHERE r.id = 20");
    let h: f64 = one(&l.a, "SELECT h_cm FROM reading WHERE id = 20");
    let layer = uid("SELECT uid FROM layer WHERE id = 1");
    let layer_site =
        uid("SELECT s.code FROM layer l JOIN site s ON s.id = l.site_id WHERE l.id = 1");
    let (top, bottom): (f64, f64) = (
        one(&l.a, "SELECT top_cm FROM layer WHERE id = 1"),
        one(&l.a, "SELECT bottom_cm FROM layer WHERE id = 1"),
    );
    let site = uid("SELECT uid FROM site WHERE id = 2");
    let site_code = uid("SELECT code FROM site WHERE id = 2");
    let elevation: f64 = one(&l.a, "SELECT elevation_m FROM site WHERE id = 2");
    let flag = uid("SELECT uid FROM flag WHERE id = 1");
    let flag_reason = uid("SELECT reason FROM flag WHERE id = 1");
    let flag_target = uid(
        "SELECT s.code || '/' || l.sensor_id || ' at ' || l.time FROM flag f
         JOIN logger_view l ON l.id = f.logger_record_id JOIN site s ON s.id = l.site_id
         WHERE f.id = 1",
    );
    let fit_a = uid(
        "SELECT model || ' ' || uid || ' made ' || created_at FROM fit WHERE sample_id = 9 AND is_current = 1",
    );
    let fit_b: String = one(
        &l.b,
        "SELECT model || ' ' || uid || ' made ' || created_at FROM fit WHERE sample_id = 9 AND is_current = 1",
    );
    let fit_sample = uid("SELECT code FROM sample WHERE id = 9");
    let counts = |kind: &str, new: usize, identical: usize, conflicting: usize| {
        format!(
            "{kind:<13} {new:>9} {identical:>10} {conflicting:>12} {:>10} {:>10}\n",
            0, 0
        )
    };
    let rows = rows_of(&l.a);
    let logger = rows.logger_records();
    let expected = format!(
        "merging from {from} (rows):\n\
         kind                new  identical  conflicting  kept INTO  took FROM\n\
         {c_campaign}{c_batches}{c_sites}{c_layers}{c_samples}{c_readings}{c_cond}{c_logger}{c_flags}{c_events}{c_fits}\
         conflicts:\n\
         \x20 sites: site {site_code} ({site})\n\
         \x20   elevation_m: INTO {elevation} | FROM 15.5\n\
         \x20   -> not resolved: choose with --prefer sites=newer|into|from\n\
         \x20 layers: layer {layer_site}:{top}-{bottom} cm ({layer})\n\
         \x20   horizon: INTO \"Ap1\" | FROM \"Ap2\"\n\
         \x20   -> not resolved: choose with --prefer layers=newer|into|from\n\
         \x20 readings: reading of sample {reading_sample} at {h} cm ({reading})\n\
         \x20   theta: INTO 0.2501 | FROM 0.2502\n\
         \x20   -> not resolved: choose with --prefer readings=newer|into|from\n\
         \x20 flags: flag {flag_reason:?} on logger record {flag_target} ({flag})\n\
         \x20   decided_at: INTO \"2026-07-01T09:00:00Z\" | FROM \"2026-07-02T09:00:00Z\"\n\
         \x20   status: INTO \"accepted\" | FROM \"dismissed\"\n\
         \x20   -> not resolved: choose with --prefer flags=newer|into|from\n\
         \x20 fits: current fit of sample {fit_sample}\n\
         \x20   current: INTO {fit_a} | FROM {fit_b}\n\
         \x20   -> not resolved: choose with --prefer fits=newer|into|from\n\
         code collisions (two different rows, never merged; rename or remove one in its file first):\n\
         \x20 sites: code \"S9\" is 00000000-0000-4000-8000-000000000001 in INTO and 00000000-0000-4000-8000-000000000002 in FROM\n\
         \x20 samples: code \"S9-a\" is 00000000-0000-4000-8000-000000000021 in INTO and 00000000-0000-4000-8000-000000000022 in FROM\n\
         \x20 layers: depth 200-220 cm of site {first_site} is 00000000-0000-4000-8000-000000000011 in INTO and 00000000-0000-4000-8000-000000000012 in FROM\n",
        from = l.b.display(),
        c_campaign = counts("campaign", 0, 1, 0),
        c_batches = counts("batches", 0, rows.batches.len(), 0),
        c_sites = counts("sites", 1, rows.sites.len() - 2, 1),
        c_layers = counts("layers", 1, rows.layers.len() - 2, 1),
        c_samples = counts("samples", 1, rows.samples.len() - 1, 0),
        c_readings = counts("readings", 0, rows.readings.len() - 1, 1),
        c_cond = counts("conductivity", 0, rows.conductivity.len(), 0),
        c_logger = counts("logger", 0, logger, 0),
        c_flags = counts("flags", 0, rows.flags.len() - 1, 1),
        c_events = counts("flag-events", 1, rows.flag_events.len() - 1, 0),
        c_fits = counts("fits", 0, rows.fits.len(), 1),
    );
    assert_eq!(stdout(&out), expected);
    assert_eq!(
        stderr(&out),
        "error: 5 unresolved conflicts and 3 code collisions (listed above); nothing was written\n"
    );
    assert_eq!(
        std::fs::read(&l.a).expect("bytes"),
        before,
        "INTO was written"
    );
    // --prefer resolves the conflicts but never a collision.
    let out = merge(&l.a, &l.b, &["--prefer", "from"]).code(1);
    assert!(stdout(&out).contains("-> took FROM's (--prefer readings=from)"));
    assert_eq!(
        stderr(&out),
        "error: 0 unresolved conflicts and 3 code collisions (listed above); nothing was written\n"
    );
    assert_eq!(
        std::fs::read(&l.a).expect("bytes"),
        before,
        "INTO was written"
    );
}

#[test]
fn merging_the_same_file_twice_changes_nothing_the_second_time() {
    let l = laptops();
    edit_both(&l);
    let prefs = [
        "--prefer",
        "newer",
        "--prefer",
        "readings=from",
        "--prefer",
        "layers=from",
        "--prefer",
        "fits=into",
    ];
    merge(&l.a, &l.b, &prefs).success();
    let once = content(&l.a);
    let counts_once = porewise::store::backup::table_counts(&Connection::open(&l.a).expect("open"))
        .expect("counts");
    let bytes = std::fs::read(&l.a).expect("bytes");
    // The second time the only difference left is the current fit INTO kept.
    let again = merge(&l.a, &l.b, &prefs).success();
    assert!(
        stdout(&again).ends_with(&format!(
            "    -> kept INTO's (--prefer fits=into)\nnothing to write: {} holds every row of the \
             other file or keeps its own version\n",
            l.a.display()
        )),
        "{}",
        stdout(&again)
    );
    assert_eq!(content(&l.a), once);
    assert_eq!(
        porewise::store::backup::table_counts(&Connection::open(&l.a).expect("open"))
            .expect("counts"),
        counts_once
    );
    assert_eq!(std::fs::read(&l.a).expect("bytes"), bytes);
    // And B merged back from the merged A ends where A is.
    merge(&l.b, &l.a, &["--prefer", "from"]).success();
    assert_eq!(content(&l.b), once);
}

#[test]
fn a_dry_run_says_what_would_happen_and_writes_nothing() {
    let l = laptops();
    edit_both(&l);
    let before = std::fs::read(&l.a).expect("bytes");
    let fingerprint = content(&l.a);
    let out = merge(&l.a, &l.b, &["--prefer", "from", "--dry-run"]).success();
    let text = stdout(&out);
    assert!(
        text.starts_with(&format!("would merge from {} (rows):\n", l.b.display())),
        "{text}"
    );
    assert!(
        text.contains("-> took FROM's (--prefer readings=from)"),
        "{text}"
    );
    assert!(
        text.ends_with("; nothing was written\n") && text.contains("dry run: would write "),
        "{text}"
    );
    assert!(text.contains("sites: 1 new"), "{text}");
    assert_eq!(std::fs::read(&l.a).expect("bytes"), before);
    assert_eq!(content(&l.a), fingerprint);
}

#[test]
fn a_merged_sample_whose_readings_changed_has_a_stale_fit_and_a_matching_fit_stays_current() {
    let l = laptops();
    // B corrects a reading of sample 9 and refits it; A keeps the old one.
    sql(
        &l.b,
        "UPDATE reading SET theta = theta + 0.003 WHERE id = (SELECT min(id) FROM reading WHERE sample_id = 9)",
    );
    let code: String = one(&l.b, "SELECT code FROM sample WHERE id = 9");
    let other: String = one(&l.b, "SELECT code FROM sample WHERE id = 10");
    porewise()
        .arg("fit")
        .arg(&l.b)
        .args(["--sample", &code, "--model", "van-genuchten"])
        .assert()
        .success();
    // B's refit may fall in the same second as the demo's fits: date it a day later.
    sql(
        &l.b,
        "UPDATE fit SET created_at = strftime('%Y-%m-%dT%H:%M:%SZ', created_at, '+1 day')
         WHERE id = (SELECT max(id) FROM fit)",
    );
    // Taking B's reading but keeping A's (older) current fit: stale in A.
    let a1 = l.dir.path().join("a1.sqlite");
    std::fs::copy(&l.a, &a1).expect("copy");
    let out = merge(
        &a1,
        &l.b,
        &["--prefer", "readings=from", "--prefer", "fits=into"],
    )
    .success();
    assert!(
        stdout(&out)
            .ends_with("stale current fits: 0 before, 1 after (refit them with `porewise fit`)\n"),
        "{}",
        stdout(&out)
    );
    let s = standing(&a1);
    let state =
        |s: &[(String, String)], c: &str| s.iter().find(|(x, _)| x == c).expect("sample").1.clone();
    assert_eq!(state(&s, &code), "Stale([ReadingsChanged])");
    assert_eq!(state(&s, &other), "current");
    // Taking B's newer fit too: current in A, as it is in B.
    let a2 = l.dir.path().join("a2.sqlite");
    std::fs::copy(&l.a, &a2).expect("copy");
    merge(
        &a2,
        &l.b,
        &["--prefer", "readings=from", "--prefer", "fits=newer"],
    )
    .success();
    assert_eq!(state(&standing(&a2), &code), "current");
    assert_eq!(standing(&a2), standing(&l.b));
    // Keeping A's reading and B's fit: that fit does not match A's readings, so it is stale.
    let a3 = l.dir.path().join("a3.sqlite");
    std::fs::copy(&l.a, &a3).expect("copy");
    merge(
        &a3,
        &l.b,
        &["--prefer", "readings=into", "--prefer", "fits=from"],
    )
    .success();
    assert_eq!(state(&standing(&a3), &code), "Stale([ReadingsChanged])");
}

#[test]
fn another_campaign_is_refused_unless_asked_and_its_settings_are_a_conflict() {
    let l = laptops();
    let other = l.dir.path().join("other.sqlite");
    porewise()
        .arg("init")
        .arg(&other)
        .args(["--name", "Other campaign"])
        .assert()
        .success();
    let before = std::fs::read(&l.a).expect("bytes");
    let out = merge(&l.a, &other, &[]).code(1);
    let err = stderr(&out);
    assert!(err.contains("are two different campaigns"), "{err}");
    assert!(
        err.contains("--other-campaign") && err.ends_with("; nothing was written\n"),
        "{err}"
    );
    let out = merge(&l.a, &other, &["--other-campaign"]).code(1);
    let text = stdout(&out);
    assert!(text.contains("  campaign: campaign "), "{text}");
    assert!(text.contains("    name: INTO "), "{text}");
    assert!(text.contains(" | FROM \"Other campaign\""), "{text}");
    assert_eq!(std::fs::read(&l.a).expect("bytes"), before);
    let out = merge(
        &l.a,
        &other,
        &["--other-campaign", "--prefer", "campaign=into"],
    )
    .success();
    assert!(
        stdout(&out).contains("nothing to write"),
        "{}",
        stdout(&out)
    );
}

#[test]
fn an_unknown_preference_is_a_user_error() {
    let l = laptops();
    let out = merge(&l.a, &l.b, &["--prefer", "sample=from"]).code(1);
    assert!(
        stderr(&out).contains("unknown kind \"sample\""),
        "{}",
        stderr(&out)
    );
    let out = merge(&l.a, &l.b, &["--prefer", "latest"]).code(1);
    assert!(
        stderr(&out).contains("expected newer, into or from"),
        "{}",
        stderr(&out)
    );
}

#[test]
fn kill_nine_during_a_merge_leaves_into_as_it_was_or_whole() {
    let l = laptops();
    // Laptop B logged a long series more: enough records that the writes take a while.
    let site: i64 = one(&l.b, "SELECT min(id) FROM site");
    let conn = Connection::open(&l.b).expect("open");
    conn.execute_batch("BEGIN").expect("begin");
    {
        conn.execute(
            "INSERT INTO logger_sensor (site_id, sensor_id, depth_cm, sensor)
             VALUES (?1, 'KILL-WC', 35, 'water_content')",
            [site],
        )
        .expect("sensor");
        let sensor = conn.last_insert_rowid();
        let mut stmt = conn
            .prepare(
                "INSERT INTO logger_record (logger_sensor_id, time_s, value)
                 VALUES (?1, unixepoch(?2), ?3)",
            )
            .expect("prepare");
        let start = chrono::DateTime::parse_from_rfc3339("2027-01-01T00:00:00Z").expect("time");
        for i in 0..150_000_i64 {
            let t = start + chrono::Duration::minutes(i);
            let value = 0.25 + 0.05 * ((i as f64) / 500.0).sin();
            stmt.execute(rusqlite::params![
                sensor,
                t.format("%Y-%m-%dT%H:%M:%SZ").to_string(),
                value
            ])
            .expect("insert");
        }
    }
    conn.execute_batch("COMMIT").expect("commit");
    drop(conn);
    let template = l.dir.path().join("template.sqlite");
    std::fs::copy(&l.a, &template).expect("copy");
    let before = content(&l.a);
    // The whole merge once, for its time and its result.
    let started = Instant::now();
    merge(&l.a, &l.b, &[]).success();
    let whole = started.elapsed();
    let after = content(&l.a);
    assert_ne!(before, after);
    let note = porewise::store::holder::note_path(&l.a);
    let (mut killed, mut in_write) = (0, 0);
    for fraction in [0.2, 0.4, 0.55, 0.65, 0.75, 0.85, 0.92, 0.97] {
        for ext in ["", "-wal", "-shm", "-writer"] {
            let _ = std::fs::remove_file(format!("{}{ext}", l.a.display()));
        }
        std::fs::copy(&template, &l.a).expect("fresh copy");
        let mut child = common::porewise_std()
            .arg("merge")
            .arg(&l.a)
            .arg(&l.b)
            .stdout(std::process::Stdio::null())
            .stderr(std::process::Stdio::null())
            .spawn()
            .expect("spawn");
        std::thread::sleep(whole.mul_f64(fraction));
        if child.try_wait().expect("wait").is_none() {
            child.kill().expect("kill -9");
            killed += 1;
        }
        child.wait().expect("reaped");
        // A writer note left behind: the process died in the write transaction, or in the
        // checkpoint SQLite runs as the commit ends (then the merge is whole).
        let writing = note.exists();
        let integrity: String = one(&l.a, "PRAGMA integrity_check");
        assert_eq!(integrity, "ok");
        let now = content(&l.a);
        assert!(
            now == before || now == after,
            "a killed merge left INTO half-written"
        );
        in_write += usize::from(writing && now == before);
    }
    // At least one run died inside the write transaction and left INTO as it was.
    assert!(
        in_write > 0,
        "no run was stopped inside the write ({killed} killed, {whole:?})"
    );
}

/// Three laptops: several FROM files merged in one go, each planned against the result of
/// the ones before.
#[test]
fn several_files_merge_in_one_transaction() {
    let l = laptops();
    let c = l.dir.path().join("c.sqlite");
    std::fs::copy(built_demo(), &c).expect("copy c");
    let (s, lab) = new_site(l.dir.path(), "NB1", 0.0);
    import(&l.b, "sites", &s);
    import(&l.b, "lab", &lab);
    let (s, lab) = new_site(l.dir.path(), "NC1", 0.02);
    import(&c, "sites", &s);
    import(&c, "lab", &lab);
    let out = porewise()
        .arg("merge")
        .arg(&l.a)
        .arg(&l.b)
        .arg(&c)
        .assert()
        .success();
    let text = stdout(&out);
    assert!(
        text.contains(&format!("merging from {} (rows):", c.display())),
        "{text}"
    );
    let merged = rows_of(&l.a);
    let codes: Vec<&str> = merged.samples.iter().map(|s| s.code.as_str()).collect();
    assert!(
        codes.contains(&"NB1-a") && codes.contains(&"NC1-a"),
        "{codes:?}"
    );
    assert_eq!(
        merged.readings.len(),
        rows_of(built_demo()).readings.len() + 14
    );
}

#[test]
fn hostile_text_in_a_conflict_is_shown_escaped() {
    let l = laptops();
    // A right-to-left override and an escape sequence in a site's name and a new sample's code.
    sql(
        &l.b,
        "UPDATE site SET name = 'Levee ' || char(8238) || 'tserc' WHERE id = 1",
    );
    sql(
        &l.b,
        "INSERT INTO sample (uid, layer_id, code, kind) VALUES
            ('00000000-0000-4000-8000-000000000031', 1, 'X' || char(27) || '[31m', 'lab_core')",
    );
    sql(
        &l.a,
        "INSERT INTO sample (uid, layer_id, code, kind) VALUES
            ('00000000-0000-4000-8000-000000000032', 1, 'X' || char(27) || '[31m', 'lab_core')",
    );
    let out = merge(&l.a, &l.b, &[]).code(1);
    let text = stdout(&out);
    assert!(
        !text.contains('\u{202e}') && !text.contains('\u{1b}'),
        "{text:?}"
    );
    assert!(text.contains("| FROM \"Levee \\u{202e}tserc\""), "{text}");
    assert!(
        text.contains("samples: code \"X\\u{1b}[31m\" is "),
        "{text}"
    );
}

#[test]
fn a_flag_made_on_the_other_laptop_comes_with_its_one_event_and_leaves_the_reading_out() {
    let l = laptops();
    let reading: i64 = one(&l.b, "SELECT min(id) FROM reading WHERE sample_id = 10");
    let code: String = one(&l.b, "SELECT code FROM sample WHERE id = 10");
    porewise()
        .arg("flag")
        .arg(&l.b)
        .arg(reading.to_string())
        .args(["--reason", "core cracked"])
        .assert()
        .success();
    let out = merge(&l.a, &l.b, &[]).success();
    assert!(
        stdout(&out).contains("flags: 1 new, flag events: 1 new"),
        "{}",
        stdout(&out)
    );
    let events: i64 = one(
        &l.a,
        "SELECT count(*) FROM flag_event e JOIN flag f ON f.id = e.flag_id
         WHERE f.reason = 'core cracked'",
    );
    assert_eq!(events, 1);
    let state = standing(&l.a)
        .into_iter()
        .find(|(c, _)| *c == code)
        .expect("sample")
        .1;
    assert_eq!(state, "Stale([ReadingsChanged])");
    assert_eq!(content(&l.a), content(&l.b));
}
