//! The exchange engine (`store::exchange`): reading a campaign's rows by uid, planning a
//! merge, applying it, and the fingerprint that does not depend on local ids.

use std::path::{Path, PathBuf};

use porewise::store::exchange;
use rusqlite::Connection;

fn demo(dir: &Path) -> PathBuf {
    let src = Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-db");
    for file in porewise::demo::generate() {
        std::fs::copy(src.join(file.name), dir.join(file.name)).expect("copy");
    }
    porewise::cli::demo::ensure_built(dir).expect("demo builds")
}

fn count(conn: &Connection, table: &str) -> usize {
    let n: i64 = conn
        .query_row(&format!("SELECT count(*) FROM {table}"), [], |r| r.get(0))
        .expect("count");
    usize::try_from(n).expect("count")
}

#[test]
fn reading_the_demo_takes_every_row_and_reads_the_same_twice() {
    let dir = tempfile::tempdir().expect("temp dir");
    let db = demo(dir.path());
    let conn = Connection::open(&db).expect("open");
    let rows = exchange::read(&conn).expect("read");
    assert_eq!(rows.batches.len(), count(&conn, "import_batch"));
    assert_eq!(rows.sites.len(), count(&conn, "site"));
    assert_eq!(rows.layers.len(), count(&conn, "layer"));
    assert_eq!(rows.samples.len(), count(&conn, "sample"));
    assert_eq!(rows.readings.len(), count(&conn, "reading"));
    assert_eq!(
        rows.conductivity.len(),
        count(&conn, "conductivity_reading")
    );
    assert_eq!(rows.logger_records(), count(&conn, "logger_record"));
    assert_eq!(rows.flags.len(), count(&conn, "flag"));
    assert_eq!(rows.flag_events.len(), count(&conn, "flag_event"));
    assert_eq!(rows.fits.len(), count(&conn, "fit"));
    // The demo's current fits match their readings, so each carries its readings key.
    let current: Vec<_> = rows.fits.iter().filter(|f| f.is_current).collect();
    assert!(!current.is_empty());
    assert!(
        current.iter().all(|f| f.readings_key.is_some()),
        "{current:?}"
    );
    // Joint fits name conductivity readings by uid.
    let joint: Vec<_> = rows
        .fits
        .iter()
        .filter_map(|f| f.joint.as_deref())
        .collect();
    assert!(!joint.is_empty());
    for j in &joint {
        let v: serde_json::Value = serde_json::from_str(j).expect("json");
        let ids = v["conductivity_reading_ids"].as_array().expect("ids");
        assert!(!ids.is_empty());
        assert!(
            ids.iter()
                .all(|id| id.as_str().is_some_and(|s| s.len() == 36)),
            "{v}"
        );
        assert!(v["conductivity_fingerprint"].as_str().is_some(), "{v}");
    }
    let again = exchange::read(&conn).expect("read again");
    assert_eq!(exchange::fingerprint(&rows), exchange::fingerprint(&again));
    // A changed reading changes the fingerprint, and the fits of its sample lose their key.
    conn.execute(
        "UPDATE reading SET theta = theta + 0.001 WHERE id = (SELECT min(id) FROM reading)",
        [],
    )
    .expect("update");
    let changed = exchange::read(&conn).expect("read changed");
    assert_ne!(
        exchange::fingerprint(&rows),
        exchange::fingerprint(&changed)
    );
    let sample: String = conn
        .query_row(
            "SELECT m.uid FROM reading r JOIN sample m ON m.id = r.sample_id
             WHERE r.id = (SELECT min(id) FROM reading)",
            [],
            |r| r.get(0),
        )
        .expect("sample");
    let fits: Vec<_> = changed
        .fits
        .iter()
        .filter(|f| f.sample_uid == sample)
        .collect();
    assert!(!fits.is_empty());
    assert!(fits.iter().all(|f| f.readings_key.is_none()));
}

#[test]
fn applying_the_demo_to_an_empty_file_recreates_it_exactly() {
    let dir = tempfile::tempdir().expect("temp dir");
    let db = demo(dir.path());
    // A flagged conductivity reading makes its sample's joint fit stale; the copy must keep
    // both the flag and that standing.
    {
        let mut c = porewise::store::Campaign::open(&db).expect("open");
        let tx = c.transaction().expect("tx");
        porewise::store::flags::flag_manual(
            &tx,
            porewise::model::domain::FlagTarget::ConductivityReading(1),
            "ring leaked",
            None,
        )
        .expect("flag");
        tx.commit().expect("commit");
    }
    let source = exchange::read(&Connection::open(&db).expect("open")).expect("read");
    let target = dir.path().join("copy.sqlite");
    let mut campaign =
        porewise::store::Campaign::create(&target, "placeholder", 33.0, 1500.0).expect("create");
    let plan = exchange::recreate(&source);
    assert!(plan.is_clean(), "{}", plan.render());
    let tx = campaign.transaction().expect("tx");
    exchange::apply(&tx, &plan).expect("apply");
    tx.commit().expect("commit");
    let copy = exchange::read(campaign.connection()).expect("read copy");
    assert_eq!(copy.campaign, source.campaign);
    assert_eq!(copy.fits, source.fits);
    assert_eq!(exchange::fingerprint(&copy), exchange::fingerprint(&source));
    // The copy's fits stand as the source's do (current, stale, failed).
    let standing = |conn: &Connection| {
        let samples =
            porewise::store::fits::samples(conn, &porewise::store::fits::Selection::all())
                .expect("samples");
        let codes: std::collections::HashMap<i64, String> =
            samples.iter().map(|s| (s.id, s.code.clone())).collect();
        let mut out: Vec<(String, String)> = porewise::store::fits::summaries(conn, &samples)
            .expect("summaries")
            .into_iter()
            .map(|(id, s)| (codes[&id].clone(), format!("{:?} {:?}", s.model, s.state)))
            .collect();
        out.sort();
        out
    };
    let stood = standing(&Connection::open(&db).expect("open"));
    assert!(
        stood.iter().any(|(_, s)| s.contains("ConductivityChanged")),
        "{stood:?}"
    );
    assert_eq!(standing(campaign.connection()), stood);
    // Applying the same campaign again plans nothing new.
    let again = exchange::plan(&copy, &source, &exchange::Preferences::default());
    assert!(again.writes_nothing(), "{}", again.render());
}

#[test]
fn apply_refuses_a_plan_with_an_unresolved_conflict_and_writes_nothing() {
    let dir = tempfile::tempdir().expect("temp dir");
    let db = demo(dir.path());
    let other = dir.path().join("other.sqlite");
    std::fs::copy(&db, &other).expect("copy");
    Connection::open(&other)
        .expect("open")
        .execute_batch(
            "UPDATE reading SET theta = 0.3333 WHERE id = 7;
             INSERT INTO site (uid, code) VALUES ('00000000-0000-4000-8000-0000000000aa', 'NEW');",
        )
        .expect("edit");
    let mut campaign = porewise::store::Campaign::open(&db).expect("open");
    let mine = exchange::read(campaign.connection()).expect("read");
    let theirs = exchange::read(&Connection::open(&other).expect("open")).expect("read");
    let plan = exchange::plan(&mine, &theirs, &exchange::Preferences::default());
    assert_eq!((plan.unresolved(), plan.insert.sites.len()), (1, 1));
    let tx = campaign.transaction().expect("tx");
    let err = exchange::apply(&tx, &plan).expect_err("refused");
    assert!(
        matches!(err, porewise::store::StoreError::Refused(ref m) if m.contains("has 1 unresolved conflict and 0 code collisions;")),
        "{err}"
    );
    drop(tx);
    assert_eq!(
        exchange::fingerprint(&exchange::read(campaign.connection()).expect("read")),
        exchange::fingerprint(&mine)
    );
}

#[test]
fn a_merge_that_gives_a_sensor_a_second_depth_keeps_each_records_own() {
    let dir = tempfile::tempdir().expect("temp dir");
    let db = demo(dir.path());
    let other = dir.path().join("other.sqlite");
    std::fs::copy(&db, &other).expect("copy");
    // The other copy logged one of its sensors a day longer, reinstalled 5 cm deeper.
    let (sensor, depth): (String, f64) = Connection::open(&other)
        .expect("open")
        .query_row(
            "SELECT sensor_id, depth_cm FROM logger_sensor ORDER BY id LIMIT 1",
            [],
            |r| Ok((r.get(0)?, r.get(1)?)),
        )
        .expect("a sensor");
    Connection::open(&other)
        .expect("open")
        .execute_batch(&format!(
            "INSERT INTO logger_record (logger_sensor_id, time_s, value, depth_cm)
             SELECT k.id, (SELECT max(time_s) FROM logger_record WHERE logger_sensor_id = k.id)
                          + 3600 * n.n, 0.25, k.depth_cm + 5
             FROM logger_sensor k, (SELECT 1 AS n UNION ALL SELECT 2 UNION ALL SELECT 3) n
             WHERE k.sensor_id = '{sensor}';"
        ))
        .expect("edit");
    let mut campaign = porewise::store::Campaign::open(&db).expect("open");
    let mine = exchange::read(campaign.connection()).expect("read");
    let theirs = exchange::read(&Connection::open(&other).expect("open")).expect("read");
    let series = theirs
        .logger
        .iter()
        .find(|s| s.sensor_id == sensor)
        .expect("the series");
    let deeper = series
        .points
        .iter()
        .filter(|p| (p.depth_cm - depth - 5.0).abs() < 1e-9)
        .count();
    assert_eq!(deeper, 3, "the copy reads its records' own depth");
    let plan = exchange::plan(&mine, &theirs, &exchange::Preferences::default());
    assert!(plan.is_clean(), "{}", plan.render());
    let tx = campaign.transaction().expect("tx");
    exchange::apply(&tx, &plan).expect("apply");
    tx.commit().expect("commit");
    let merged = exchange::read(campaign.connection()).expect("read merged");
    assert_eq!(
        exchange::fingerprint(&merged),
        exchange::fingerprint(&plan.merged(&mine))
    );
    assert_eq!(
        exchange::fingerprint(&merged),
        exchange::fingerprint(&theirs)
    );
    // Into an empty file, the sensor is made with its latest depth; the earlier records keep
    // theirs.
    let target = dir.path().join("copy.sqlite");
    let mut copy =
        porewise::store::Campaign::create(&target, "placeholder", 33.0, 1500.0).expect("create");
    let tx = copy.transaction().expect("tx");
    exchange::apply(&tx, &exchange::recreate(&theirs)).expect("apply");
    tx.commit().expect("commit");
    let conn = copy.connection();
    let (made, own): (f64, i64) = conn
        .query_row(
            "SELECT k.depth_cm, (SELECT count(*) FROM logger_record r
                                 WHERE r.logger_sensor_id = k.id AND r.depth_cm IS NOT NULL)
             FROM logger_sensor k WHERE k.sensor_id = ?1",
            [&sensor],
            |r| Ok((r.get(0)?, r.get(1)?)),
        )
        .expect("sensor");
    assert!((made - depth - 5.0).abs() < 1e-9, "{made}");
    assert_eq!(own as usize, series.points.len() - 3);
    assert_eq!(
        exchange::fingerprint(&exchange::read(conn).expect("read")),
        exchange::fingerprint(&theirs)
    );
}

#[test]
fn apply_refuses_a_logger_time_not_in_the_stored_form() {
    let dir = tempfile::tempdir().expect("temp dir");
    let db = demo(dir.path());
    let mut theirs = exchange::read(&Connection::open(&db).expect("open")).expect("read");
    theirs.logger[0].points[0].time = "2026-05-01 10:00:00".into();
    let target = dir.path().join("copy.sqlite");
    let mut copy =
        porewise::store::Campaign::create(&target, "placeholder", 33.0, 1500.0).expect("create");
    let tx = copy.transaction().expect("tx");
    let err = exchange::apply(&tx, &exchange::recreate(&theirs)).expect_err("refused");
    assert!(
        err.to_string()
            .contains("at \"2026-05-01 10:00:00\": expected a time as YYYY-MM-DDTHH:MM:SSZ"),
        "{err}"
    );
}
