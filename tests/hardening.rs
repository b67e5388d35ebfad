//! Locks, files and messages, through the binary: a campaign fit leaves the file open to other
//! writers and skips samples whose readings changed meanwhile, a writer that times out names
//! the command holding the campaign, an export cut short leaves the earlier export whole,
//! damaged and unwritable campaigns say so, a file that is not a campaign is left untouched,
//! every cause of an error is said once, no `-0` in a table, and the export's memory does not
//! grow with the campaign.

mod common;

use std::io::{BufRead, BufReader, Write};
use std::path::{Path, PathBuf};
use std::process::Stdio;
use std::sync::mpsc;
use std::time::{Duration, Instant};

use common::{LAB_SUCTIONS_CM, Scratch, lab_sheet, porewise, porewise_std, stderr};

/// Wait up to `limit` for `done()`, checking every 20 ms.
fn wait_for(limit: Duration, mut done: impl FnMut() -> bool) -> bool {
    let start = Instant::now();
    while start.elapsed() < limit {
        if done() {
            return true;
        }
        std::thread::sleep(Duration::from_millis(20));
    }
    done()
}

fn names_in(dir: &Path) -> Vec<String> {
    let mut names: Vec<String> = std::fs::read_dir(dir)
        .expect("folder")
        .map(|e| e.expect("entry").file_name().to_string_lossy().into_owned())
        .collect();
    names.sort();
    names
}

/// Every file of an export folder, with the line stating the export time left out.
fn export_content(dir: &Path) -> Vec<(String, String)> {
    names_in(dir)
        .into_iter()
        .map(|name| {
            let text = std::fs::read_to_string(dir.join(&name)).expect("read");
            let kept: Vec<&str> = text
                .lines()
                .filter(|l| !l.contains("\"exported_at\"") && !l.contains("class=\"exported\""))
                .collect();
            (name, kept.join("\n"))
        })
        .collect()
}

#[test]
fn a_fit_leaves_the_campaign_open_and_skips_samples_whose_readings_changed() {
    let s = Scratch::new();
    // Enough samples that fitting them takes seconds in a debug build.
    let lab = s.write("lab.csv", &lab_sheet(4, 300, &LAB_SUCTIONS_CM));
    s.import("lab", &[&lab], &[]).success();
    let changed = "G002-S00150";
    let reading: i64 = s
        .connect()
        .query_row(
            "SELECT r.id FROM reading r JOIN sample m ON m.id = r.sample_id
             WHERE m.code = ?1 ORDER BY r.h_cm DESC LIMIT 1",
            [changed],
            |r| r.get(0),
        )
        .expect("reading");

    let mut fit = porewise_std()
        .arg("fit")
        .arg(&s.db)
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("start the fit");
    let (lines, seen) = mpsc::channel();
    let err = fit.stderr.take().expect("stderr");
    let reader = std::thread::spawn(move || {
        let mut all = String::new();
        for line in BufReader::new(err).lines() {
            let line = line.unwrap_or_default();
            let _ = lines.send(line.clone());
            all.push_str(&line);
            all.push('\n');
        }
        all
    });
    // The fit says when it has read the readings and begins fitting them.
    let started = seen
        .recv_timeout(Duration::from_secs(60))
        .unwrap_or_default();
    assert!(
        started.starts_with("fitting 1200 samples with auto"),
        "the fit did not say it had started fitting: {started:?}"
    );
    // While it fits, other commands write at once.
    porewise()
        .arg("set")
        .arg(&s.db)
        .args(["--fc-kpa", "10"])
        .assert()
        .success();
    porewise()
        .arg("flag")
        .arg(&s.db)
        .arg(reading.to_string())
        .args(["--reason", "plate leaked"])
        .assert()
        .success();
    let out = fit.wait_with_output().expect("fit ends");
    let err = reader.join().expect("stderr");
    let text = String::from_utf8_lossy(&out.stdout);
    assert_eq!(out.status.code(), Some(3), "{text}\n{err}");
    assert!(
        text.contains("fitted 1199 samples with auto; 0 failed; 1 not recorded"),
        "{text}"
    );
    assert!(
        err.contains(&format!(
            "sample {changed}: not recorded: its readings changed while it was being fitted"
        )),
        "{err}"
    );
    let conn = s.connect();
    let fits_of = |code: &str| -> i64 {
        conn.query_row(
            "SELECT count(*) FROM fit f JOIN sample m ON m.id = f.sample_id WHERE m.code = ?1",
            [code],
            |r| r.get(0),
        )
        .expect("count")
    };
    assert_eq!(fits_of(changed), 0, "a fit of readings it no longer has");
    assert_eq!(fits_of("G002-S00151"), 1);
    let current: i64 = conn
        .query_row("SELECT count(*) FROM fit WHERE is_current = 1", [], |r| {
            r.get(0)
        })
        .expect("count");
    assert_eq!(current, 1199);
    let fc: f64 = conn
        .query_row("SELECT fc_kpa FROM campaign", [], |r| r.get(0))
        .expect("fc");
    assert!((fc - 10.0).abs() < 1e-12, "{fc}");
}

#[cfg(unix)]
fn mkfifo(path: &Path) {
    let status = std::process::Command::new("mkfifo")
        .arg(path)
        .status()
        .expect("mkfifo");
    assert!(status.success());
}

/// Open a named pipe for writing (it waits for its reader), write `text`, close it; false
/// when no reader came within 30 s (the writing thread is then left waiting, not the test).
#[cfg(unix)]
fn feed(pipe: &Path, text: &str) -> bool {
    let (done, finished) = mpsc::channel();
    let (pipe, text) = (pipe.to_path_buf(), text.to_string());
    std::thread::spawn(move || {
        let written = std::fs::OpenOptions::new()
            .write(true)
            .open(&pipe)
            .and_then(|mut w| w.write_all(text.as_bytes()));
        let _ = done.send(written.is_ok());
    });
    finished
        .recv_timeout(Duration::from_secs(30))
        .unwrap_or(false)
}

#[cfg(unix)]
#[test]
fn a_writer_that_waits_in_vain_names_the_command_holding_the_campaign() {
    let s = Scratch::new();
    s.import_ok("sites", &["valid/sites.csv"]);
    let records = "site,depth_cm,sensor,sensor_id,time,value,unit\n\
                   LV,30,tensiometer,LV-T30,2026-05-01T00:00:00Z,-60.0,kPa\n\
                   LV,30,tensiometer,LV-T30,2026-05-01T01:00:00Z,-61.5,kPa\n";
    // The import reads its file twice (its SHA-256 first, then the records inside its one
    // transaction); a named pipe lets the test hold it there, write lock taken.
    let pipe = s.dir.path().join("station.csv");
    mkfifo(&pipe);
    let mut import = porewise_std()
        .args(["import", "logger"])
        .arg(&s.db)
        .arg(&pipe)
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("start the import");
    assert!(feed(&pipe, records), "the import did not read its file");
    let mut note = s.db.as_os_str().to_owned();
    note.push("-writer");
    let note = PathBuf::from(note);
    wait_for(Duration::from_secs(20), || note.exists());
    let pid = import.id();
    let refused = porewise()
        .arg("set")
        .arg(&s.db)
        .args(["--fc-kpa", "10"])
        .output()
        .expect("run set");
    // Let the import finish before judging, so a failed check leaves no process waiting.
    let fed = feed(&pipe, records);
    if !fed {
        let _ = import.kill();
    }
    let out = import.wait_with_output().expect("import ends");
    assert!(fed, "the import did not read its file a second time");
    let err = String::from_utf8_lossy(&refused.stderr);
    assert_eq!(refused.status.code(), Some(1), "{err}");
    assert!(
        err.contains(&format!(
            "is busy: `porewise import logger` (process {pid}, writing since 20"
        )),
        "{err}"
    );
    assert!(
        err.contains("did not finish within 5 s; try again when it has finished"),
        "{err}"
    );
    assert!(!err.contains("database is locked"), "{err}");
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    assert!(!note.exists(), "the writer note outlived its transaction");
    assert_eq!(s.count("logger_record"), 2);
    let fc: f64 = s
        .connect()
        .query_row("SELECT fc_kpa FROM campaign", [], |r| r.get(0))
        .expect("fc");
    assert!((fc - 33.0).abs() < 1e-12);
}

#[cfg(unix)]
#[test]
fn an_export_cut_short_leaves_the_earlier_export_whole() {
    let s = Scratch::new();
    let lab = s.write("lab.csv", &lab_sheet(3, 20, &LAB_SUCTIONS_CM));
    s.import("lab", &[&lab], &[]).success();
    porewise().arg("fit").arg(&s.db).assert().success();
    let out = s.dir.path().join("summary");
    let export = || {
        porewise()
            .arg("export")
            .arg(&s.db)
            .arg("--to")
            .arg(&out)
            .assert()
    };
    export().success();
    let before = export_content(&out);
    let csv_size = std::fs::metadata(out.join("parameters.csv"))
        .expect("csv")
        .len();
    let json_size = std::fs::metadata(out.join("campaign.json"))
        .expect("json")
        .len();
    assert!(
        csv_size < 60_000 && json_size > 140_000,
        "{csv_size} {json_size}"
    );
    // A change that reaches every file: field capacity.
    porewise()
        .arg("set")
        .arg(&s.db)
        .args(["--fc-kpa", "10"])
        .assert()
        .success();
    // The export dies writing its first large file: a file-size limit of 128 blocks (64 KiB
    // to 128 KiB) lets the tables through and stops campaign.json, as a full disk or a kill
    // would.
    let cut = std::process::Command::new("sh")
        .arg("-c")
        .arg("ulimit -f 128 && exec \"$0\" \"$@\"")
        .arg(env!("CARGO_BIN_EXE_porewise"))
        .arg("export")
        .arg(&s.db)
        .arg("--to")
        .arg(&out)
        .output()
        .expect("run the cut export");
    assert!(!cut.status.success(), "the export was not cut short");
    let cut_short = export_content(&out);
    assert!(
        cut_short == before,
        "the folder mixes two exports after an export was cut short: {:?}",
        cut_short
            .iter()
            .zip(&before)
            .filter(|(a, b)| a != b)
            .map(|(a, _)| a.0.as_str())
            .collect::<Vec<_>>()
    );
    let hidden: Vec<String> = names_in(&out)
        .into_iter()
        .filter(|n| n.starts_with('.'))
        .collect();
    assert!(
        hidden.is_empty(),
        "temporary files in the folder: {hidden:?}"
    );
    // The next export replaces it whole and leaves nothing behind, the cut one's folder
    // included.
    export().success();
    let after = export_content(&out);
    assert_eq!(
        after.iter().map(|(n, _)| n.as_str()).collect::<Vec<_>>(),
        [
            "campaign.json",
            "parameters.csv",
            "profiles.csv",
            "report.html",
            "sites.geojson"
        ]
    );
    assert!(after != before, "the new export is the old one");
    let json: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("campaign.json")).expect("json"))
            .expect("parses");
    let fingerprint = json["fingerprint_sha256"].as_str().expect("fingerprint");
    let html = std::fs::read_to_string(out.join("report.html")).expect("html");
    assert!(html.contains(fingerprint));
    assert!(
        std::fs::read_to_string(out.join("parameters.csv"))
            .expect("csv")
            .contains(",10,1500,")
    );
    let hidden: Vec<String> = names_in(s.dir.path())
        .into_iter()
        .filter(|n| n.starts_with('.'))
        .collect();
    assert!(hidden.is_empty(), "left behind: {hidden:?}");
}

#[test]
fn a_damaged_campaign_says_it_is_damaged() {
    let s = Scratch::new();
    s.import_ok("sites", &["valid/sites.csv"]);
    s.import_ok("layers", &["valid/layers.csv"]);
    s.import_ok("lab", &["valid/lab_kpa.csv"]);
    let damaged = s.dir.path().join("damaged.sqlite");
    let bytes = std::fs::read(&s.db).expect("read");
    std::fs::write(&damaged, &bytes[..bytes.len() / 2]).expect("write half");
    let assert = porewise().arg("list").arg(&damaged).assert().code(1);
    let err = stderr(&assert);
    assert!(
        err.contains(
            "damaged.sqlite is damaged: the database is malformed (PRAGMA integrity_check: "
        ),
        "{err}"
    );
    assert!(err.contains("restore it from a backup copy"), "{err}");
    assert!(!err.contains("not a porewise campaign"), "{err}");
}

#[test]
fn a_journal_that_cannot_be_written_is_named() {
    let s = Scratch::new();
    // SQLite keeps its shared-memory index beside the file; a folder in its way stops every
    // write, for any user.
    let mut shm = s.db.as_os_str().to_owned();
    shm.push("-shm");
    std::fs::create_dir(PathBuf::from(&shm)).expect("block the journal");
    let assert = porewise()
        .arg("set")
        .arg(&s.db)
        .args(["--fc-kpa", "10"])
        .assert()
        .code(1);
    let err = stderr(&assert);
    assert!(
        err.contains("cannot write to ") && err.contains("cannot write the journal: "),
        "{err}"
    );
    assert!(
        err.contains("campaign.sqlite-shm cannot be opened for writing"),
        "{err}"
    );
    assert!(!err.contains("not a porewise campaign"), "{err}");
}

/// Whether this process runs as root (file permissions do not bind it).
#[cfg(unix)]
fn running_as_root() -> bool {
    std::fs::read_to_string("/proc/self/status")
        .ok()
        .and_then(|s| {
            s.lines()
                .find(|l| l.starts_with("Uid:"))
                .map(|l| l.split_whitespace().nth(1) == Some("0"))
        })
        .unwrap_or(false)
}

#[cfg(unix)]
#[test]
fn a_campaign_in_a_read_only_folder_says_so() {
    use std::os::unix::fs::PermissionsExt;
    let s = Scratch::new();
    let folder = s.dir.path().join("read-only");
    std::fs::create_dir(&folder).expect("folder");
    let db = folder.join("c.sqlite");
    std::fs::copy(&s.db, &db).expect("copy");
    let perms = |mode| std::fs::Permissions::from_mode(mode);
    std::fs::set_permissions(s.dir.path(), perms(0o755)).expect("chmod");
    std::fs::set_permissions(&db, perms(0o644)).expect("chmod");
    std::fs::set_permissions(&folder, perms(0o555)).expect("chmod");
    // Permissions do not bind root: run as an unprivileged user then (setpriv, util-linux).
    let mut cmd = if running_as_root() {
        let mut c = std::process::Command::new("setpriv");
        c.args(["--reuid=65534", "--regid=65534", "--clear-groups"])
            .arg(env!("CARGO_BIN_EXE_porewise"));
        c
    } else {
        std::process::Command::new(env!("CARGO_BIN_EXE_porewise"))
    };
    let out = cmd.arg("list").arg(&db).output().expect("run list");
    std::fs::set_permissions(&folder, perms(0o755)).expect("chmod back");
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(1), "{err}");
    assert!(
        err.contains("cannot write the journal: its folder") && err.contains("is read-only"),
        "{err}"
    );
    assert!(err.contains("c.sqlite-wal and c.sqlite-shm"), "{err}");
    assert!(!err.contains("not a porewise campaign"), "{err}");
}

#[test]
fn a_file_with_the_id_but_no_campaign_is_refused_untouched() {
    let dir = tempfile::tempdir().expect("temp dir");
    let file = dir.path().join("other.sqlite");
    {
        let conn = rusqlite::Connection::open(&file).expect("create");
        conn.execute_batch(
            "PRAGMA application_id = 1347375703; CREATE TABLE notes (id INTEGER PRIMARY KEY, text TEXT);
             INSERT INTO notes (text) VALUES ('not a campaign');",
        )
        .expect("fill");
    }
    let before = std::fs::read(&file).expect("read");
    for args in [&["list"][..], &["set", "--fc-kpa", "10"][..]] {
        let mut cmd = porewise();
        cmd.arg(args[0]).arg(&file).args(&args[1..]);
        let assert = cmd.assert().code(1);
        assert!(
            stderr(&assert).contains("other.sqlite is not a porewise campaign file"),
            "{}",
            stderr(&assert)
        );
    }
    assert_eq!(
        std::fs::read(&file).expect("read"),
        before,
        "the file was changed"
    );
    let mut wal = file.as_os_str().to_owned();
    wal.push("-wal");
    assert!(!PathBuf::from(wal).exists());
}

#[test]
fn every_cause_of_an_error_is_said_once() {
    let s = Scratch::new();
    let missing = s.dir.path().join("missing.csv");
    let assert = porewise()
        .args(["import", "lab"])
        .arg(&s.db)
        .arg(&missing)
        .assert()
        .code(1);
    let err = stderr(&assert);
    assert_eq!(err.matches("(os error 2)").count(), 1, "{err}");
    assert!(err.starts_with("error: cannot read "), "{err}");
    // An export into a path under a file: the system's reason, once.
    let file = s.write("plain.txt", "x");
    let assert = porewise()
        .arg("export")
        .arg(&s.db)
        .arg("--to")
        .arg(Path::new(&file).join("sub"))
        .assert()
        .code(1);
    let err = stderr(&assert);
    assert_eq!(err.matches("(os error").count(), 1, "{err}");
}

#[test]
fn a_site_without_a_fitted_layer_totals_zero_not_minus_zero() {
    let s = Scratch::new();
    s.import_ok("sites", &["valid/sites.csv"]);
    s.import_ok("layers", &["valid/layers.csv"]);
    s.import_ok("lab", &["valid/lab_kpa.csv"]);
    porewise().arg("fit").arg(&s.db).assert().code(3);
    let out = s.dir.path().join("summary");
    porewise()
        .arg("export")
        .arg(&s.db)
        .arg("--to")
        .arg(&out)
        .assert()
        .success();
    let profiles = std::fs::read_to_string(out.join("profiles.csv")).expect("profiles");
    let total = profiles
        .lines()
        .find(|l| l.starts_with("BS,total,"))
        .expect("a total row for BS (no fitted layer)");
    // No interval columns filled: nothing fitted, so no total interval and no pooled
    // between-core variance (0 layers).
    assert_eq!(total, "BS,total,BS:0-100,,,,0,100,,,,,,,,0,0,,,100,100,,0,");
    assert!(
        !profiles.split([',', '\n']).any(|cell| cell == "-0"),
        "{profiles}"
    );
    let json = std::fs::read_to_string(out.join("campaign.json")).expect("json");
    let negative_zero = json.lines().find(|l| {
        let value = l.trim().trim_end_matches(',');
        value == "-0.0" || value.ends_with(": -0.0")
    });
    assert_eq!(negative_zero, None, "negative zero in campaign.json");
    assert!(json.contains("\"total_mm\": 0.0,"), "no zero total");
    let listing = s.list(&["profiles", "--format", "csv"]);
    assert!(
        !listing.split([',', '\n']).any(|cell| cell == "-0"),
        "{listing}"
    );
}

/// The peak resident memory of a command, KiB: its `VmHWM` (high-water mark) read until it
/// exits.
#[cfg(target_os = "linux")]
fn peak_memory_kib(mut cmd: std::process::Command) -> u64 {
    let mut child = cmd
        .stdout(Stdio::null())
        .stderr(Stdio::null())
        .spawn()
        .expect("start");
    let status = format!("/proc/{}/status", child.id());
    let mut peak = 0;
    loop {
        if let Ok(text) = std::fs::read_to_string(&status)
            && let Some(kib) = text
                .lines()
                .find(|l| l.starts_with("VmHWM:"))
                .and_then(|l| l.split_whitespace().nth(1))
                .and_then(|v| v.parse::<u64>().ok())
        {
            peak = peak.max(kib);
        }
        if child.try_wait().expect("wait").is_some() {
            break;
        }
        std::thread::sleep(Duration::from_millis(5));
    }
    assert!(child.wait().expect("status").success());
    peak
}

#[cfg(target_os = "linux")]
#[test]
fn export_memory_does_not_grow_with_the_campaign() {
    // Two campaigns, the second ten times the first, all in one site (an export reads a
    // batch of samples at a time, whatever the sites).
    let suctions: Vec<f64> = (0..60).map(|i| 10f64.powf(f64::from(i) / 12.0)).collect();
    let peak = |samples: usize| {
        let s = Scratch::new();
        let lab = s.write("lab.csv", &lab_sheet(1, samples, &suctions));
        s.import("lab", &[&lab], &[]).success();
        let mut cmd = std::process::Command::new(env!("CARGO_BIN_EXE_porewise"));
        cmd.arg("export")
            .arg(&s.db)
            .arg("--to")
            .arg(s.dir.path().join("out"))
            .args(["--format", "csv,json,geojson"]);
        let kib = peak_memory_kib(cmd);
        let json = std::fs::metadata(s.dir.path().join("out").join("campaign.json"))
            .expect("json")
            .len();
        (kib, json)
    };
    let (small, small_json) = peak(150);
    let (large, large_json) = peak(1500);
    assert!(large_json > 9 * small_json, "{small_json} {large_json}");
    // The large campaign.json is tens of MB; holding it (or the campaign) would show here.
    // SQLite's page cache (at most 32 MiB a connection) fills with the larger file.
    let grown_kib = large.saturating_sub(small);
    assert!(
        grown_kib < 40 * 1024,
        "peak memory grew by {grown_kib} KiB from {small} KiB for {} more bytes of JSON",
        large_json - small_json
    );
}
