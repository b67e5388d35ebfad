//! The store through the library: schema and migrations, per-connection PRAGMAs, the import
//! entry point the demo builder uses, and the overview.

mod common;

use porewise::import::{self, ImportError, ImportKind, ImportOptions, Source};
use porewise::store::{self, Campaign, StoreError, migrate};
use rusqlite::Connection;

fn schema(conn: &Connection) -> String {
    let mut stmt = conn
        .prepare(
            "SELECT type, name, sql FROM sqlite_schema WHERE sql IS NOT NULL ORDER BY type, name",
        )
        .expect("prepare");
    let rows = stmt
        .query_map([], |r| {
            Ok(format!(
                "-- {} {}\n{};\n",
                r.get::<_, String>(0)?,
                r.get::<_, String>(1)?,
                r.get::<_, String>(2)?
            ))
        })
        .expect("query");
    rows.collect::<Result<Vec<_>, _>>()
        .expect("rows")
        .join("\n")
}

#[test]
fn migrations_build_the_schema_on_an_empty_database() {
    let mut conn = Connection::open_in_memory().expect("memory");
    assert_eq!(
        migrate::migrate(&mut conn).expect("migrate"),
        migrate::latest_version()
    );
    insta::assert_snapshot!("schema_latest", schema(&conn));
    // Every table is STRICT and every row-holding table of the data model is there.
    for table in common::TABLES {
        let sql: String = conn
            .query_row(
                "SELECT sql FROM sqlite_schema WHERE type = 'table' AND name = ?1",
                [table],
                |r| r.get(0),
            )
            .unwrap_or_else(|e| panic!("table {table}: {e}"));
        assert!(sql.trim_end().ends_with("STRICT"), "{table} is not STRICT");
    }
}

#[test]
fn the_schema_enforces_physical_ranges_and_references() {
    let c = Campaign::in_memory("t", 33.0, 1500.0).expect("campaign");
    let conn = c.connection();
    let fk: i64 = conn
        .pragma_query_value(None, "foreign_keys", |r| r.get(0))
        .expect("pragma");
    assert_eq!(fk, 1, "foreign keys on");
    let err = conn
        .execute(
            "INSERT INTO reading (uid, sample_id, h_cm, theta) VALUES
             ('00000000-0000-4000-8000-000000000000', 42, 10, 0.3)",
            [],
        )
        .expect_err("no sample 42");
    assert!(err.to_string().contains("FOREIGN KEY"), "{err}");
    conn.execute_batch(
        "INSERT INTO site (uid, code) VALUES ('00000000-0000-4000-8000-000000000001', 'S');
         INSERT INTO layer (uid, site_id, top_cm, bottom_cm) VALUES
             ('00000000-0000-4000-8000-000000000002', 1, 0, 10);
         INSERT INTO sample (uid, layer_id, code, kind) VALUES
             ('00000000-0000-4000-8000-000000000003', 1, 'M', 'lab_core');",
    )
    .expect("rows");
    for (h, theta) in [(-1.0, 0.3), (10.0, 1.5), (2.0e7, 0.1)] {
        let r = conn.execute(
            "INSERT INTO reading (uid, sample_id, h_cm, theta) VALUES
             ('00000000-0000-4000-8000-000000000009', 1, ?1, ?2)",
            rusqlite::params![h, theta],
        );
        assert!(r.is_err(), "h {h} theta {theta} accepted");
    }
    // A flag is on a reading or a logger record, not both and not neither.
    let r = conn.execute(
        "INSERT INTO flag (reason, origin, status, created_at)
         VALUES ('x', 'auto', 'suggested', '2026-01-01T00:00:00Z')",
        [],
    );
    assert!(r.is_err());
    // At most one current fit per sample.
    let fit = "INSERT INTO fit (sample_id, model, parameters, statistics, n_points,
         readings_fingerprint, created_at, is_current)
         VALUES (1, 'van-genuchten', '{}', '{}', 0, 'f', '2026-01-01T00:00:00Z', 1)";
    conn.execute(fit, []).expect("first current fit");
    assert!(conn.execute(fit, []).is_err(), "second current fit");
}

#[test]
fn a_campaign_file_gets_wal_full_sync_foreign_keys_and_a_busy_timeout() {
    let dir = tempfile::tempdir().expect("dir");
    let path = dir.path().join("c.sqlite");
    Campaign::create(&path, "Pragmas", 33.0, 1500.0).expect("create");
    let c = Campaign::open(&path).expect("open");
    let conn = c.connection();
    let q = |name: &str| -> String {
        conn.query_row(&format!("PRAGMA {name}"), [], |r| {
            r.get::<_, rusqlite::types::Value>(0)
        })
        .map(|v| match v {
            rusqlite::types::Value::Integer(i) => i.to_string(),
            rusqlite::types::Value::Text(t) => t,
            other => format!("{other:?}"),
        })
        .expect("pragma")
    };
    assert_eq!(q("journal_mode"), "wal");
    assert_eq!(q("foreign_keys"), "1");
    assert_eq!(q("synchronous"), "2", "FULL");
    assert_eq!(q("busy_timeout"), "5000");
    assert_eq!(q("user_version"), migrate::latest_version().to_string());
    assert!(matches!(
        Campaign::create(&path, "Again", 33.0, 1500.0),
        Err(StoreError::Exists(_))
    ));
}

#[test]
fn a_newer_schema_is_refused_naming_both_versions() {
    let dir = tempfile::tempdir().expect("dir");
    let path = dir.path().join("c.sqlite");
    drop(Campaign::create(&path, "Old", 33.0, 1500.0).expect("create"));
    let newer = migrate::latest_version() + 1;
    Connection::open(&path)
        .expect("open")
        .pragma_update(None, "user_version", newer)
        .expect("bump");
    match Campaign::open(&path) {
        Err(StoreError::TooNew { found, known }) => {
            assert_eq!((found, known), (newer, migrate::latest_version()));
        }
        other => panic!("expected TooNew, got {other:?}"),
    }
    let plain = dir.path().join("plain.sqlite");
    Connection::open(&plain)
        .expect("open")
        .execute_batch("CREATE TABLE t (x)")
        .expect("table");
    assert!(matches!(
        Campaign::open(&plain),
        Err(StoreError::NotACampaign(_))
    ));
}

fn source(name: &str, text: &str) -> Source {
    Source {
        name: name.to_string(),
        bytes: text.as_bytes().to_vec(),
    }
}

#[test]
fn the_library_import_returns_every_diagnostic_and_writes_nothing() {
    let mut c = Campaign::in_memory("t", 33.0, 1500.0).expect("campaign");
    let bad = source(
        "mem.csv",
        "site,top_cm,bottom_cm,sample,method,suction_bar,theta\n\
         A,0,10,S1,plate,0.1,0.3\n\
         A,0,10,S1,plate,-0.1,0.3\n\
         A,10,5,S2,plate,1,0.2\n",
    );
    let err = import::import_sources(&mut c, ImportKind::Lab, &[bad], ImportOptions::default())
        .expect_err("bad input");
    let ImportError::Invalid(diags) = err else {
        panic!("expected diagnostics, got {err:?}");
    };
    let places: Vec<(u64, &str)> = diags
        .items()
        .iter()
        .map(|d| (d.line, d.column.as_str()))
        .collect();
    assert_eq!(places, vec![(3, "suction_bar"), (4, "bottom_cm")]);
    assert_eq!(
        store::overview::counts(c.connection())
            .expect("counts")
            .readings,
        0
    );
}

#[test]
fn the_overview_shows_sites_layers_samples_and_reading_counts() {
    let mut c = Campaign::in_memory("Overview test", 10.0, 1500.0).expect("campaign");
    let sites = source(
        "s.csv",
        "site,name,latitude,longitude\nA,Upper plot,45,8\nB,,45.1,8.1\n",
    );
    let lab = source(
        "l.csv",
        "site,top_cm,bottom_cm,sample,method,suction_cm,theta\n\
         A,0,15,A1,sandbox,10,0.40\nA,0,15,A1,plate,330,0.25\nA,15,50,A2,plate,330,0.22\n",
    );
    let options = ImportOptions::default();
    import::import_sources(&mut c, ImportKind::Sites, &[sites], options).expect("sites");
    let summary = import::import_sources(&mut c, ImportKind::Lab, &[lab], options).expect("lab");
    assert_eq!(
        (
            summary.counts.samples_added,
            summary.counts.readings_added,
            summary.counts.layers_added
        ),
        (2, 3, 2)
    );
    assert!(summary.files[0].batch_id.is_some());
    let o = store::overview(&c).expect("overview");
    assert_eq!(o.counts.readings, 3);
    assert_eq!(o.sites.len(), 2);
    assert_eq!(o.sites[0].layers.len(), 2);
    assert_eq!(o.sites[0].layers[1].samples[0].code, "A2");
    assert!(o.sites[1].layers.is_empty());
    let text = o.to_string();
    assert!(
        text.contains("Campaign \"Overview test\": field capacity at 10 kPa"),
        "{text}"
    );
    assert!(text.contains("A  Upper plot"), "{text}");
    assert!(
        text.contains("0-15 cm") && text.contains("A1 (2 readings)"),
        "{text}"
    );
    assert!(
        text.contains("15-50 cm") && text.contains("A2 (1 reading)"),
        "{text}"
    );
}

#[test]
fn a_version_1_file_upgrades_with_its_data_intact() {
    let tmp = tempfile::tempdir().expect("temp dir");
    let path = tmp.path().join("v1.sqlite");
    {
        // A file as porewise with schema version 1 left it.
        let conn = Connection::open(&path).expect("create");
        conn.execute_batch(migrate::MIGRATIONS[0])
            .expect("v1 schema");
        conn.pragma_update(None, "user_version", 1)
            .expect("version");
        conn.execute_batch(
            "INSERT INTO campaign VALUES (1, 'old', NULL, 33, 1500, '2026-01-05T10:00:00Z');
             INSERT INTO site (id, uid, code) VALUES (1, '00000000-0000-4000-8000-000000000001', 'S');
             INSERT INTO layer (id, uid, site_id, top_cm, bottom_cm)
                 VALUES (1, '00000000-0000-4000-8000-000000000002', 1, 0, 10);
             INSERT INTO sample (id, uid, layer_id, code, kind)
                 VALUES (1, '00000000-0000-4000-8000-000000000003', 1, 'S-a', 'lab_core');
             INSERT INTO reading (id, uid, sample_id, h_cm, theta)
                 VALUES (1, '00000000-0000-4000-8000-000000000004', 1, 100.0, 0.3125);
             INSERT INTO flag (reading_id, reason, origin, status, created_at, decided_at)
                 VALUES (1, 'odd', 'manual', 'accepted', '2026-01-05T10:00:00Z',
                         '2026-01-06T09:00:00Z');
             INSERT INTO logger_record (id, site_id, depth_cm, sensor, sensor_id, time, value,
                                        source_line)
                 VALUES (7, 1, 30, 'tensiometer', 'T30', '2026-01-05T10:15:00Z', 120.5, 4);
             INSERT INTO flag (logger_record_id, reason, origin, status, created_at)
                 VALUES (7, 'spike', 'auto', 'suggested', '2026-01-05T11:00:00Z');",
        )
        .expect("v1 data");
    }
    let campaign = Campaign::open(&path).expect("opens and migrates");
    let conn = campaign.connection();
    assert_eq!(
        migrate::schema_version(conn).expect("version"),
        migrate::latest_version()
    );
    let (code, h, theta): (String, f64, f64) = conn
        .query_row(
            "SELECT m.code, r.h_cm, r.theta FROM reading r JOIN sample m ON m.id = r.sample_id",
            [],
            |r| Ok((r.get(0)?, r.get(1)?, r.get(2)?)),
        )
        .expect("reading survives");
    assert_eq!((code.as_str(), h, theta), ("S-a", 100.0, 0.3125));
    assert_eq!(campaign.settings().expect("settings").name, "old");
    // Version 2: a new reading bumps the sample's revision.
    let rev = |c: &Connection| -> i64 {
        c.query_row("SELECT readings_rev FROM sample WHERE id = 1", [], |r| {
            r.get(0)
        })
        .expect("rev")
    };
    // Version 6 rebuilt the reading table: the copy fired no trigger (no revision moved).
    let before = rev(conn);
    assert_eq!(before, 0);
    conn.execute(
        "INSERT INTO reading (uid, sample_id, h_cm, theta)
         VALUES ('00000000-0000-4000-8000-000000000005', 1, 1000.0, 0.25)",
        [],
    )
    .expect("insert");
    assert_eq!(rev(conn), before + 1);
    // Version 6: a reading at the oven-dry suction, 10^6 kPa (Fredlund & Xing 1994), is
    // stored; one beyond it is not. The flag still points at its reading.
    conn.execute(
        "INSERT INTO reading (uid, sample_id, h_cm, theta)
         VALUES ('00000000-0000-4000-8000-000000000006', 1, ?1, 0.0)",
        [porewise::model::retention::fredlund_xing::H_DRY_CM],
    )
    .expect("oven-dry reading");
    assert!(
        conn.execute(
            "INSERT INTO reading (uid, sample_id, h_cm, theta)
             VALUES ('00000000-0000-4000-8000-000000000007', 1, 1.1e7, 0.0)",
            [],
        )
        .is_err()
    );
    let flagged: i64 = conn
        .query_row("SELECT reading_id FROM flag", [], |r| r.get(0))
        .expect("flag");
    assert_eq!(flagged, 1);
    let fk: i64 = conn
        .pragma_query_value(None, "foreign_keys", |r| r.get(0))
        .expect("pragma");
    assert_eq!(fk, 1, "foreign keys back on after the upgrade");
    // Version 3: the old flag has its decision in the audit trail, and new changes add events.
    let trail = store::flags::events(conn, 1).expect("events");
    assert_eq!(trail.len(), 1, "{trail:?}");
    assert_eq!(trail[0].to, porewise::model::domain::FlagStatus::Accepted);
    assert_eq!(trail[0].at.to_rfc3339(), "2026-01-06T09:00:00+00:00");
    store::flags::clear(conn, 1, Some("fine after all")).expect("clear");
    assert_eq!(store::flags::events(conn, 1).expect("events").len(), 2);
    // Version 11: the logger record keeps its id, sensor, time and value; its flag still
    // points at it.
    let record: (i64, String, f64, String, String, f64, i64) = conn
        .query_row(
            "SELECT v.id, v.sensor_id, v.depth_cm, v.sensor, v.time, v.value, v.time_s
             FROM flag f JOIN logger_view v ON v.id = f.logger_record_id",
            [],
            |r| {
                Ok((
                    r.get(0)?,
                    r.get(1)?,
                    r.get(2)?,
                    r.get(3)?,
                    r.get(4)?,
                    r.get(5)?,
                    r.get(6)?,
                ))
            },
        )
        .expect("logger record survives");
    assert_eq!(
        record,
        (
            7,
            "T30".into(),
            30.0,
            "tensiometer".into(),
            "2026-01-05T10:15:00Z".into(),
            120.5,
            1_767_608_100 // date -u -d 2026-01-05T10:15:00Z +%s
        )
    );
}

/// A logger record as schema version 10 held it: id, site, depth, kind, sensor id, time text,
/// value, batch, source line.
type OldRecord = (
    i64,
    i64,
    f64,
    String,
    String,
    String,
    f64,
    Option<i64>,
    Option<i64>,
);

fn old_records(conn: &Connection, table: &str) -> Vec<OldRecord> {
    conn.prepare(&format!(
        "SELECT id, site_id, depth_cm, sensor, sensor_id, time, value, batch_id, source_line
         FROM {table} ORDER BY id"
    ))
    .expect("prepare")
    .query_map([], |r| {
        Ok((
            r.get(0)?,
            r.get(1)?,
            r.get(2)?,
            r.get(3)?,
            r.get(4)?,
            r.get(5)?,
            r.get(6)?,
            r.get(7)?,
            r.get(8)?,
        ))
    })
    .expect("query")
    .collect::<rusqlite::Result<_>>()
    .expect("rows")
}

#[test]
fn a_version_10_file_made_by_porewise_keeps_its_logger_records_and_flags() {
    // tests/data/v10/campaign.sqlite: made by porewise at schema version 10 (its README says
    // how), with flags on logger records and a sensor a merge left at two depths.
    let tmp = tempfile::tempdir().expect("temp dir");
    let path = tmp.path().join("v10.sqlite");
    std::fs::copy(common::data_dir().join("v10/campaign.sqlite"), &path).expect("copy");
    let (records, flags, tables) = {
        let conn = Connection::open(&path).expect("open");
        assert_eq!(migrate::schema_version(&conn).expect("version"), 10);
        let flags: Vec<(i64, Option<i64>, String)> = conn
            .prepare("SELECT id, logger_record_id, status FROM flag ORDER BY id")
            .expect("prepare")
            .query_map([], |r| Ok((r.get(0)?, r.get(1)?, r.get(2)?)))
            .expect("query")
            .collect::<rusqlite::Result<_>>()
            .expect("flags");
        let tables: Vec<(String, i64)> = common::TABLES
            .iter()
            .filter(|t| **t != "logger_sensor")
            .map(|t| {
                let n = conn
                    .query_row(&format!("SELECT count(*) FROM {t}"), [], |r| r.get(0))
                    .expect("count");
                ((*t).to_string(), n)
            })
            .collect();
        (old_records(&conn, "logger_record"), flags, tables)
    };
    assert_eq!(records.len(), 37);
    assert!(flags.iter().filter(|f| f.1.is_some()).count() >= 10);
    let campaign = Campaign::open(&path).expect("opens and migrates");
    let conn = campaign.connection();
    assert_eq!(
        migrate::schema_version(conn).expect("version"),
        migrate::latest_version()
    );
    // Every record reads back through the view as it was, under the same id.
    assert_eq!(old_records(conn, "logger_view"), records);
    let flags_now: Vec<(i64, Option<i64>, String)> = conn
        .prepare("SELECT id, logger_record_id, status FROM flag ORDER BY id")
        .expect("prepare")
        .query_map([], |r| Ok((r.get(0)?, r.get(1)?, r.get(2)?)))
        .expect("query")
        .collect::<rusqlite::Result<_>>()
        .expect("flags");
    assert_eq!(flags_now, flags);
    for (table, n) in &tables {
        let now: i64 = conn
            .query_row(&format!("SELECT count(*) FROM {table}"), [], |r| r.get(0))
            .expect("count");
        assert_eq!(now, *n, "{table}");
    }
    // One row per sensor; LV-T30 takes the depth of its latest records (35 cm), and its 12
    // earlier records keep their 30 cm.
    let sensors: Vec<(String, f64, String)> = conn
        .prepare("SELECT sensor_id, depth_cm, sensor FROM logger_sensor ORDER BY sensor_id")
        .expect("prepare")
        .query_map([], |r| Ok((r.get(0)?, r.get(1)?, r.get(2)?)))
        .expect("query")
        .collect::<rusqlite::Result<_>>()
        .expect("sensors");
    assert_eq!(sensors.len(), 5);
    assert_eq!(
        sensors[0],
        ("LV-T30".to_string(), 35.0, "tensiometer".to_string())
    );
    let own: i64 = conn
        .query_row(
            "SELECT count(*) FROM logger_record WHERE depth_cm IS NOT NULL OR sensor IS NOT NULL",
            [],
            |r| r.get(0),
        )
        .expect("own depths");
    assert_eq!(own, 12);
    let broken: i64 = conn
        .query_row("SELECT count(*) FROM pragma_foreign_key_check", [], |r| {
            r.get(0)
        })
        .expect("foreign keys");
    assert_eq!(broken, 0);
    // The exchange rows are those porewise read from the file at version 10: its push printed
    // this fingerprint (tests/data/README.md).
    let rows = porewise::store::exchange::read(conn).expect("exchange read");
    assert_eq!(rows.logger_records(), 37);
    assert_eq!(
        porewise::store::exchange::fingerprint(&rows),
        "2730b3c59d722d1a773cf0353f7accc938fe6922cc7af94542549419eeecb834"
    );
}
