//! `porewise backup`: a verified copy while the campaign is in use, refusals that write
//! nothing, and a listing cut short by its reader.

mod common;

use std::io::Read;
use std::path::{Path, PathBuf};
use std::process::Stdio;

use common::{porewise, stderr, stdout};
use porewise::store::Campaign;
use porewise::store::backup::{backup_in_steps, table_counts};
use rusqlite::Connection;

fn demo(dir: &Path) -> PathBuf {
    let src = Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-db");
    for file in porewise::demo::generate() {
        std::fs::copy(src.join(file.name), dir.join(file.name)).expect("copy");
    }
    porewise::cli::demo::ensure_built(dir).expect("demo builds")
}

fn counts(path: &Path) -> Vec<(String, i64)> {
    table_counts(&Connection::open(path).expect("open")).expect("counts")
}

/// Names of the files in `dir`.
fn files(dir: &Path) -> Vec<String> {
    let mut names: Vec<String> = std::fs::read_dir(dir)
        .expect("dir")
        .map(|e| e.expect("entry").file_name().to_string_lossy().into_owned())
        .collect();
    names.sort();
    names
}

#[test]
fn a_backup_while_another_connection_writes_is_the_campaign_as_it_began() {
    let dir = tempfile::tempdir().expect("temp dir");
    let db = demo(dir.path());
    let before = counts(&db);
    let campaign = Campaign::open(&db).expect("opens");
    let writer = Connection::open(&db).expect("writer");
    writer
        .busy_timeout(std::time::Duration::from_secs(5))
        .expect("timeout");
    let target = dir.path().join("copy.sqlite");
    let mut steps = 0;
    // Eight pages a step: the demo takes dozens of steps, and a site is added after the first.
    let summary = backup_in_steps(campaign.connection(), &target, false, 8, |_, _| {
        steps += 1;
        if steps == 1 {
            writer
                .execute(
                    "INSERT INTO site (uid, code, name) VALUES \
                     ('00000000-0000-4000-8000-00000000abcd', 'NEW1', 'added during the backup')",
                    [],
                )
                .expect("a writer is not blocked by the backup");
        }
    })
    .expect("backup");
    assert!(steps > 10, "{steps} steps");
    assert_eq!(summary.tables, before);
    assert_eq!(counts(&target), before, "the copy is the snapshot");
    let site = |t: &[(String, i64)]| t.iter().find(|(n, _)| n == "site").map(|(_, n)| *n);
    assert_eq!(site(&counts(&db)), site(&before).map(|n| n + 1));
    // The copy stands alone (no journal beside it), opens as a campaign and lists.
    assert_eq!(
        files(dir.path())
            .iter()
            .filter(|f| f.starts_with("copy"))
            .count(),
        1
    );
    let listed = porewise()
        .args(["list", target.to_str().expect("path"), "sites"])
        .assert()
        .success();
    assert!(stdout(&listed).contains("LEV1"));
    assert!(!stdout(&listed).contains("NEW1"));
}

#[test]
fn a_backup_beside_an_open_write_transaction_succeeds() {
    let dir = tempfile::tempdir().expect("temp dir");
    let db = demo(dir.path());
    let before = counts(&db);
    // The terminal UI or a fit holding the write lock: the backup reads beside it.
    let mut holder = Campaign::open(&db).expect("opens");
    let tx = holder.transaction().expect("write lock");
    let target = dir.path().join("while-writing.sqlite");
    let out = porewise()
        .arg("backup")
        .arg(&db)
        .arg(&target)
        .assert()
        .success();
    let text = stdout(&out);
    assert!(text.contains("integrity ok"), "{text}");
    drop(tx);
    assert_eq!(counts(&target), before);
}

#[test]
fn refusals_write_nothing() {
    let dir = tempfile::tempdir().expect("temp dir");
    let db = demo(dir.path());
    let target = dir.path().join("copy.sqlite");
    std::fs::write(&target, "an older copy").expect("write");
    let listing = files(dir.path());
    // An existing file, without --replace.
    let out = porewise()
        .arg("backup")
        .arg(&db)
        .arg(&target)
        .assert()
        .code(1);
    assert!(stderr(&out).contains("already exists"), "{}", stderr(&out));
    assert_eq!(
        std::fs::read_to_string(&target).expect("kept"),
        "an older copy"
    );
    // A folder, a missing folder, a file that is not a campaign.
    let out = porewise()
        .arg("backup")
        .arg(&db)
        .arg(dir.path())
        .assert()
        .code(1);
    assert!(stderr(&out).contains("it is a folder"), "{}", stderr(&out));
    let missing = dir.path().join("no-such-folder").join("x.sqlite");
    let out = porewise()
        .arg("backup")
        .arg(&db)
        .arg(&missing)
        .assert()
        .code(1);
    assert!(stderr(&out).contains("does not exist"), "{}", stderr(&out));
    let not_ours = dir.path().join("lab-a-levee-terrace.csv");
    let other = dir.path().join("other.sqlite");
    let out = porewise()
        .arg("backup")
        .arg(&not_ours)
        .arg(&other)
        .assert()
        .code(1);
    assert!(
        stderr(&out).contains("not a porewise campaign"),
        "{}",
        stderr(&out)
    );
    assert_eq!(files(dir.path()), listing, "nothing was written");
    // --replace replaces the old copy with a verified one.
    porewise()
        .arg("backup")
        .arg(&db)
        .arg(&target)
        .arg("--replace")
        .assert()
        .success();
    assert_eq!(counts(&target), counts(&db));
}

#[test]
fn a_listing_cut_short_by_its_reader_stops_quietly() {
    let dir = tempfile::tempdir().expect("temp dir");
    let db = demo(dir.path());
    // The demo's readings listing is larger than a pipe's buffer, so the writer meets the
    // closed pipe (`porewise list ... | head -1`).
    let mut child = common::porewise_std()
        .args(["list", db.to_str().expect("path"), "readings"])
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("spawn");
    // Read the first line a byte at a time and close the pipe: a buffered reader would take
    // up to 8 KiB, and with the pipe's 64 KiB the writer could finish before the close.
    let mut stdout = child.stdout.take().expect("stdout");
    let mut bytes = Vec::new();
    let mut byte = [0u8; 1];
    while stdout.read(&mut byte).expect("read") == 1 && byte[0] != b'\n' {
        bytes.push(byte[0]);
    }
    drop(stdout);
    let first = String::from_utf8_lossy(&bytes).into_owned();
    assert!(first.starts_with("reading"), "{first}");
    let out = child.wait_with_output().expect("wait");
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(!err.contains("panicked"), "{err}");
    assert_eq!(out.status.code(), Some(141), "{err}");
}
