//! Push and pull against a real PostgreSQL server (`POREWISE_TEST_PG`, see
//! `tests/common/pg.rs`): rows written and read back unchanged, round trips, conflicts,
//! concurrent pushes.

mod common;
#[path = "common/pg.rs"]
mod pg;

use std::path::{Path, PathBuf};

use porewise::archive::migrate::migrate;
use porewise::archive::rows::{NewRows, insert, read_campaign, upsert_campaign};
use porewise::store::exchange;
use rusqlite::Connection;

fn demo(dir: &Path) -> PathBuf {
    let src = Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-db");
    for file in porewise::demo::generate() {
        std::fs::copy(src.join(file.name), dir.join(file.name)).expect("copy");
    }
    porewise::cli::demo::ensure_built(dir).expect("demo builds")
}

#[test]
fn the_demo_written_with_copy_reads_back_with_the_same_fingerprint() {
    let Some((url, _)) = pg::fresh_schema("rows_round_trip") else {
        return;
    };
    let dir = tempfile::tempdir().expect("temp dir");
    let db = demo(dir.path());
    let local = exchange::read(&Connection::open(&db).expect("open")).expect("read");
    let target = pg::target(&url);
    let mut client = pg::client(&url);
    migrate(&mut client, &target).expect("init");
    let mut tx = client.transaction().expect("tx");
    upsert_campaign(&mut tx, &local.campaign).expect("campaign");
    insert(&mut tx, &local.campaign, &NewRows::all(&local)).expect("insert");
    tx.commit().expect("commit");
    let back = read_campaign(&mut client, &local.campaign.uid)
        .expect("read")
        .expect("there");
    assert_eq!(back.logger_records(), local.logger_records());
    assert_eq!(back.fits.len(), local.fits.len());
    assert_eq!(exchange::fingerprint(&back), exchange::fingerprint(&local));
    // The server-only columns: every layer with sand, silt and clay has its class, and every
    // current ok fit with a report its available water.
    let classes: i64 = client
        .query_one(
            "SELECT count(*) FROM layer WHERE texture_class IS NULL AND clay_pct IS NOT NULL",
            &[],
        )
        .expect("classes")
        .get(0);
    assert_eq!(classes, 0);
    let with_aw: i64 = client
        .query_one(
            "SELECT count(*) FROM fit WHERE is_current AND available_water IS NOT NULL",
            &[],
        )
        .expect("aw")
        .get(0);
    assert!(with_aw > 0);
    assert!(
        read_campaign(&mut client, "no-such")
            .expect("read")
            .is_none()
    );
}

use common::{porewise, stderr, stdout};
use porewise::archive::pull::pull;
use porewise::archive::push::{PushOutcome, push};
use porewise::store::exchange::Preferences;

fn fingerprint_of(path: &Path) -> String {
    exchange::fingerprint(&exchange::read(&Connection::open(path).expect("open")).expect("read"))
}

/// The archive's content fingerprint of a campaign: read back from the server now, and as
/// recorded by the last push.
fn server_fingerprints(url: &str, uid: &str) -> (String, String) {
    let mut client = pg::client(url);
    let rows = read_campaign(&mut client, uid)
        .expect("read")
        .expect("there");
    let stored: String = client
        .query_one("SELECT fingerprint FROM campaign WHERE uid = $1", &[&uid])
        .expect("stored")
        .get(0);
    (exchange::fingerprint(&rows), stored)
}

fn campaign_uid(path: &Path) -> String {
    Connection::open(path)
        .expect("open")
        .query_row("SELECT uid FROM campaign", [], |r| r.get(0))
        .expect("uid")
}

#[test]
fn push_pull_push_round_trip_changes_nothing() {
    let Some((url, _)) = pg::fresh_schema("round_trip") else {
        return;
    };
    let dir = tempfile::tempdir().expect("temp dir");
    let db = demo(dir.path());
    let out = stdout(&porewise().arg("push").arg(&db).arg(&url).assert().success());
    assert!(out.contains("new campaign in the archive"), "{out}");
    assert!(
        out.contains(":***@") && !out.contains(":archive-pw"),
        "{out}"
    );
    let uid = campaign_uid(&db);
    let (now, stored) = server_fingerprints(&url, &uid);
    assert_eq!(now, fingerprint_of(&db));
    assert_eq!(stored, now);

    let pulled = dir.path().join("pulled.sqlite");
    let out = stdout(
        &porewise()
            .args(["pull", &url, "--campaign", "Floodplain demo (invented)"])
            .arg(&pulled)
            .assert()
            .success(),
    );
    assert!(out.contains("8832 logger records"), "{out}");
    assert_eq!(fingerprint_of(&pulled), fingerprint_of(&db));
    // The pulled file is an ordinary campaign: it opens and lists.
    porewise().arg("list").arg(&pulled).assert().success();

    // Pushing it back: nothing to write; the archive is as it was.
    let out = stdout(
        &porewise()
            .arg("push")
            .arg(&pulled)
            .arg(&url)
            .assert()
            .success(),
    );
    assert!(out.contains("nothing to write"), "{out}");
    assert_eq!(server_fingerprints(&url, &uid).0, now);

    // Pull by uid; never over an existing file.
    let err = stderr(
        &porewise()
            .args(["pull", &url, "--campaign", &uid])
            .arg(&pulled)
            .assert()
            .code(1),
    );
    assert!(err.contains("exists"), "{err}");
    let again = dir.path().join("again.sqlite");
    porewise()
        .args(["pull", &url, "--campaign", &uid])
        .arg(&again)
        .assert()
        .success();
    assert_eq!(fingerprint_of(&again), now);
    // A flag made on the pulled copy goes up; the original, which the archive now holds
    // all of, has nothing new and says so.
    porewise()
        .arg("flag")
        .arg(&again)
        .args(["5", "--reason", "core cracked"])
        .assert()
        .success();
    let out = stdout(
        &porewise()
            .arg("push")
            .arg(&again)
            .arg(&url)
            .assert()
            .success(),
    );
    assert!(out.contains("pushed campaign"), "{out}");
    let out = stdout(&porewise().arg("push").arg(&db).arg(&url).assert().success());
    assert!(out.contains("nothing new: campaign"), "{out}");
    let third = dir.path().join("third.sqlite");
    porewise()
        .args(["pull", &url, "--campaign", &uid])
        .arg(&third)
        .assert()
        .success();
    assert_eq!(fingerprint_of(&third), fingerprint_of(&again));
    assert_eq!(server_fingerprints(&url, &uid).0, fingerprint_of(&again));
    // Unflagged on the third copy, the reading's sample has its fit back as it was: pushed
    // and pulled again, the fit matches its readings everywhere.
    porewise()
        .arg("unflag")
        .arg(&third)
        .arg("5")
        .assert()
        .success();
    porewise()
        .arg("push")
        .arg(&third)
        .arg(&url)
        .assert()
        .success();
    let fourth = dir.path().join("fourth.sqlite");
    porewise()
        .args(["pull", &url, "--campaign", &uid])
        .arg(&fourth)
        .assert()
        .success();
    assert_eq!(fingerprint_of(&fourth), fingerprint_of(&third));
    let err = stderr(
        &porewise()
            .args(["pull", &url, "--campaign", "no such campaign"])
            .arg(dir.path().join("none.sqlite"))
            .assert()
            .code(1),
    );
    assert!(err.contains("holds no campaign"), "{err}");
    assert!(!dir.path().join("none.sqlite").exists());
}

#[test]
fn a_conflicting_push_is_refused_whole_until_a_preference_resolves_it() {
    let Some((url, _)) = pg::fresh_schema("conflicts") else {
        return;
    };
    let dir = tempfile::tempdir().expect("temp dir");
    let db = demo(dir.path());
    porewise().arg("push").arg(&db).arg(&url).assert().success();
    let uid = campaign_uid(&db);
    let before = server_fingerprints(&url, &uid).0;

    // A copy with one site renamed (a conflict) and one new site (not a conflict).
    let copy = dir.path().join("copy.sqlite");
    std::fs::copy(&db, &copy).expect("copy");
    let conn = Connection::open(&copy).expect("open");
    conn.execute_batch(
        "UPDATE site SET name = 'Levee crest, renamed' WHERE code = 'LEV1';
         INSERT INTO site (uid, code, name) VALUES ('0f0f0f0f-0000-4000-8000-00000000abcd', 'NEW1', 'added');",
    )
    .expect("edit");
    drop(conn);
    let err = stderr(&porewise().arg("push").arg(&copy).arg(&url).assert().code(1));
    assert!(err.contains("push refused"), "{err}");
    assert!(err.contains("Levee crest, renamed"), "{err}");
    assert_eq!(server_fingerprints(&url, &uid).0, before, "nothing written");

    // Keep the archive's version: the new site goes in, the name stays.
    let out = stdout(
        &porewise()
            .arg("push")
            .arg(&copy)
            .arg(&url)
            .args(["--prefer", "sites=archive"])
            .assert()
            .success(),
    );
    assert!(out.contains("pushed"), "{out}");
    let mut client = pg::client(&url);
    let names: Vec<String> = client
        .query(
            "SELECT name FROM site WHERE code IN ('LEV1', 'NEW1') ORDER BY code",
            &[],
        )
        .expect("names")
        .iter()
        .map(|r| r.get(0))
        .collect();
    assert_eq!(names, ["Levee crest", "added"]);
    // Then this file's version.
    porewise()
        .arg("push")
        .arg(&copy)
        .arg(&url)
        .args(["--prefer", "local"])
        .assert()
        .success();
    let name: String = client
        .query_one("SELECT name FROM site WHERE code = 'LEV1'", &[])
        .expect("name")
        .get(0);
    assert_eq!(name, "Levee crest, renamed");
    let (now, stored) = server_fingerprints(&url, &uid);
    assert_eq!(
        now, stored,
        "the recorded fingerprint is the archive's content"
    );
    assert_eq!(now, fingerprint_of(&copy));
}

/// `porewise push FILE URL --dry-run`.
fn dry_run(url: &str, file: &Path) -> assert_cmd::Command {
    let mut cmd = porewise();
    cmd.arg("push").arg(file).arg(url).arg("--dry-run");
    cmd
}

#[test]
fn a_dry_run_says_what_a_push_would_write_and_writes_nothing() {
    let Some((url, schema)) = pg::fresh_schema("dry_run") else {
        return;
    };
    let dir = tempfile::tempdir().expect("temp dir");
    let db = demo(dir.path());
    let uid = campaign_uid(&db);
    // Not even the archive's tables: a dry run against a fresh schema says to set it up.
    let err = stderr(&dry_run(&url, &db).assert().code(1));
    assert!(err.contains("archive init"), "{err}");
    let tables: i64 = pg::client(&url)
        .query_one(
            "SELECT count(*) FROM information_schema.tables WHERE table_schema = $1",
            &[&schema],
        )
        .expect("tables")
        .get(0);
    assert_eq!(tables, 0, "{err}");
    porewise()
        .args(["archive", "init", &url])
        .assert()
        .success();
    let in_archive = |uid: &str| -> i64 {
        pg::client(&url)
            .query_one("SELECT count(*) FROM campaign WHERE uid = $1", &[&uid])
            .expect("count")
            .get(0)
    };

    // A campaign new to the archive: the rows it would add, and no campaign afterwards.
    let out = stdout(&dry_run(&url, &db).assert().success());
    assert!(out.contains("dry run: would push"), "{out}");
    assert!(out.contains("nothing was written"), "{out}");
    assert_eq!(in_archive(&uid), 0, "{out}");

    // A campaign the archive has, with a new site: the plan and the fingerprint a push would
    // record, while the archive keeps its content and its recorded fingerprint.
    porewise().arg("push").arg(&db).arg(&url).assert().success();
    let before = server_fingerprints(&url, &uid);
    let copy = dir.path().join("copy.sqlite");
    std::fs::copy(&db, &copy).expect("copy");
    Connection::open(&copy)
        .expect("open")
        .execute(
            "INSERT INTO site (uid, code, name) VALUES ('0f0f0f0f-0000-4000-8000-00000000dcba', 'NEW2', 'added')",
            [],
        )
        .expect("edit");
    let out = stdout(&dry_run(&url, &copy).assert().success());
    assert!(out.contains("dry run: would push 1 row of"), "{out}");
    assert_eq!(server_fingerprints(&url, &uid), before, "nothing written");
    // The fingerprint it announced is the one the real push then records.
    let announced = out
        .split("fingerprint then ")
        .nth(1)
        .and_then(|rest| rest.split(')').next())
        .expect("announced fingerprint")
        .to_string();
    porewise()
        .arg("push")
        .arg(&copy)
        .arg(&url)
        .assert()
        .success();
    let (now, stored) = server_fingerprints(&url, &uid);
    assert_eq!(stored, announced);
    assert_eq!(now, announced);

    // A conflict refuses the dry run as it refuses a push.
    Connection::open(&db)
        .expect("open")
        .execute(
            "UPDATE site SET name = 'Levee crest, renamed' WHERE code = 'LEV1'",
            [],
        )
        .expect("edit");
    let err = stderr(&dry_run(&url, &db).assert().code(1));
    assert!(err.contains("push would be refused"), "{err}");
    assert!(err.contains("Levee crest, renamed"), "{err}");
    assert_eq!(server_fingerprints(&url, &uid).0, now);
}

#[test]
fn concurrent_pushes_of_edited_copies_lose_nothing() {
    let Some((url, _)) = pg::fresh_schema("concurrent") else {
        return;
    };
    let dir = tempfile::tempdir().expect("temp dir");
    let db = demo(dir.path());
    let target = pg::target(&url);
    migrate(&mut pg::client(&url), &target).expect("init");
    let uid = campaign_uid(&db);
    // Each copy adds a site of its own and logger records at times of its own to one
    // existing sensor; all of them start pushing at once, the first push of the campaign
    // among them (so two may try to create it).
    let copies = 6;
    let sensor: i64 = Connection::open(&db)
        .expect("open")
        .query_row(
            "SELECT logger_sensor_id FROM logger_record LIMIT 1",
            [],
            |r| r.get(0),
        )
        .expect("a sensor");
    let mut files = Vec::new();
    for i in 0..copies {
        let copy = dir.path().join(format!("copy{i}.sqlite"));
        std::fs::copy(&db, &copy).expect("copy");
        let conn = Connection::open(&copy).expect("open");
        conn.execute(
            "INSERT INTO site (uid, code) VALUES (?1, ?2)",
            rusqlite::params![
                format!("0f0f0f0f-0000-4000-8000-0000000000{i:02}"),
                format!("NEW{i}")
            ],
        )
        .expect("site");
        for k in 0..50 {
            conn.execute(
                "INSERT INTO logger_record (logger_sensor_id, time_s, value)
                 VALUES (?1, unixepoch(?2), 0.25)",
                rusqlite::params![
                    sensor,
                    format!("2031-{:02}-{:02}T{:02}:00:00Z", i + 1, k % 28 + 1, k / 28)
                ],
            )
            .expect("record");
        }
        files.push(copy);
    }
    let base = exchange::read(&Connection::open(&db).expect("open")).expect("read");
    let barrier = std::sync::Arc::new(std::sync::Barrier::new(copies));
    let handles: Vec<_> = files
        .iter()
        .map(|file| {
            let rows = exchange::read(&Connection::open(file).expect("open")).expect("read");
            let (url, barrier) = (url.clone(), barrier.clone());
            std::thread::spawn(move || {
                let mut client = pg::client(&url);
                barrier.wait();
                match push(&mut client, &rows, &Preferences::default()).expect("push") {
                    PushOutcome::Done(done) => done.attempts,
                    PushOutcome::Refused(plan) => panic!("refused:\n{}", plan.render()),
                }
            })
        })
        .collect();
    for h in handles {
        h.join().expect("thread");
    }
    let mut client = pg::client(&url);
    let after = read_campaign(&mut client, &uid)
        .expect("read")
        .expect("there");
    assert_eq!(after.sites.len(), base.sites.len() + copies);
    assert_eq!(after.logger_records(), base.logger_records() + copies * 50);
    let (now, stored) = server_fingerprints(&url, &uid);
    assert_eq!(now, stored);
    // A pull holds the union too.
    let out = dir.path().join("union.sqlite");
    pull(&mut client, &uid, &out).expect("pull");
    assert_eq!(fingerprint_of(&out), now);
}

#[test]
fn a_refit_pushed_becomes_the_archives_current_fit_with_its_derived_values() {
    let Some((url, _)) = pg::fresh_schema("refit_current") else {
        return;
    };
    let dir = tempfile::tempdir().expect("temp dir");
    let db = demo(dir.path());
    porewise().arg("push").arg(&db).arg(&url).assert().success();
    let uid = campaign_uid(&db);
    let copy = dir.path().join("refit.sqlite");
    std::fs::copy(&db, &copy).expect("copy");
    porewise()
        .arg("fit")
        .arg(&copy)
        .args(["--sample", "TER1-A-a", "--model", "brooks-corey"])
        .assert()
        .success();
    let out = stdout(
        &porewise()
            .arg("push")
            .arg(&copy)
            .arg(&url)
            .args(["--prefer", "local"])
            .assert()
            .success(),
    );
    assert!(out.contains("pushed"), "{out}");
    let local_current: String = Connection::open(&copy)
        .expect("open")
        .query_row(
            "SELECT f.uid FROM fit f JOIN sample s ON s.id = f.sample_id
             WHERE s.code = 'TER1-A-a' AND f.is_current = 1",
            [],
            |r| r.get(0),
        )
        .expect("current");
    let mut client = pg::client(&url);
    let rows = client
        .query(
            "SELECT f.uid, f.model, f.available_water FROM fit f
             JOIN sample s ON s.campaign_uid = f.campaign_uid AND s.uid = f.sample_uid
             WHERE s.code = 'TER1-A-a' AND f.is_current",
            &[],
        )
        .expect("server current");
    assert_eq!(rows.len(), 1, "one current fit per sample");
    assert_eq!(rows[0].get::<_, String>(0), local_current);
    assert_eq!(rows[0].get::<_, String>(1), "brooks-corey");
    assert!(rows[0].get::<_, Option<f64>>(2).is_some());
    let doubled: i64 = client
        .query_one(
            "SELECT count(*) FROM (SELECT sample_uid FROM fit WHERE is_current
             GROUP BY campaign_uid, sample_uid HAVING count(*) > 1) d",
            &[],
        )
        .expect("doubled")
        .get(0);
    assert_eq!(doubled, 0);
    let (now, stored) = server_fingerprints(&url, &uid);
    assert_eq!(now, stored);
    assert_eq!(now, fingerprint_of(&copy));
}

#[test]
fn a_push_waiting_too_long_for_another_push_of_its_campaign_gives_up_writing_nothing() {
    let Some((url, _)) = pg::fresh_schema("busy_campaign") else {
        return;
    };
    let dir = tempfile::tempdir().expect("temp dir");
    let db = demo(dir.path());
    porewise().arg("push").arg(&db).arg(&url).assert().success();
    let uid = campaign_uid(&db);
    let copy = dir.path().join("copy.sqlite");
    std::fs::copy(&db, &copy).expect("copy");
    Connection::open(&copy)
        .expect("open")
        .execute_batch("UPDATE site SET name = 'held back' WHERE code = 'LEV1'")
        .expect("edit");
    let rows = exchange::read(&Connection::open(&copy).expect("open")).expect("read");
    // Another push holds the campaign's row.
    let mut holder = pg::client(&url);
    let mut held = holder.transaction().expect("tx");
    held.execute("SELECT 1 FROM campaign WHERE uid = $1 FOR UPDATE", &[&uid])
        .expect("lock");
    let mut client = pg::client(&url);
    let mut prefs = Preferences::default();
    prefs.add("from").expect("prefer");
    let err = porewise::archive::push::push_waiting(
        &mut client,
        &rows,
        &prefs,
        std::time::Duration::from_millis(200),
    )
    .expect_err("busy");
    assert!(err.to_string().contains("is busy"), "{err}");
    held.rollback().expect("release");
    let name: String = client
        .query_one("SELECT name FROM site WHERE code = 'LEV1'", &[])
        .expect("name")
        .get(0);
    assert_eq!(name, "Levee crest", "nothing written");
    // Once the other push is done, this one goes through.
    let done = push(&mut client, &rows, &prefs).expect("push");
    assert!(matches!(done, PushOutcome::Done(_)));
}

#[test]
fn two_campaigns_of_one_name_are_listed_and_pulled_by_uid() {
    let Some((url, _)) = pg::fresh_schema("same_name") else {
        return;
    };
    let dir = tempfile::tempdir().expect("temp dir");
    let db = demo(dir.path());
    let other = dir.path().join("other.sqlite");
    porewise()
        .arg("init")
        .arg(&other)
        .args(["--name", "Floodplain demo (invented)"])
        .assert()
        .success();
    porewise().arg("push").arg(&db).arg(&url).assert().success();
    porewise()
        .arg("push")
        .arg(&other)
        .arg(&url)
        .assert()
        .success();
    let json = stdout(
        &porewise()
            .args(["archive", "list", &url, "--format", "json"])
            .assert()
            .success(),
    );
    let list: serde_json::Value = serde_json::from_str(&json).expect("json");
    let list = list.as_array().expect("array");
    assert_eq!(list.len(), 2);
    let demo_uid = campaign_uid(&db);
    let entry = list
        .iter()
        .find(|c| c["uid"] == demo_uid.as_str())
        .expect("the demo is listed");
    assert_eq!(entry["logger_records"], 8832);
    assert_eq!(entry["fingerprint"], fingerprint_of(&db).as_str());
    let out = dir.path().join("which.sqlite");
    let err = stderr(
        &porewise()
            .args(["pull", &url, "--campaign", "Floodplain demo (invented)"])
            .arg(&out)
            .assert()
            .code(1),
    );
    assert!(err.contains("2 campaigns are named"), "{err}");
    assert!(err.contains(&demo_uid), "{err}");
    assert!(!out.exists());
    porewise()
        .args(["pull", &url, "--campaign", &campaign_uid(&other)])
        .arg(&out)
        .assert()
        .success();
    assert_eq!(fingerprint_of(&out), fingerprint_of(&other));
}
