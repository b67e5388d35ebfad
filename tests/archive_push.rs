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
