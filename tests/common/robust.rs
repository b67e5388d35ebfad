//! Robustness loops over the real binary, shared by `tests/robustness.rs` (a few seeded runs
//! each) and `benches/robustness.rs` (many, with the figures printed):
//!
//! - [`kill_loop`]: `kill -9` during a lab import, a campaign fit and an export; after each
//!   kill the campaign file passes `PRAGMA integrity_check`, an import is all or nothing, every
//!   recorded fit is whole, and the export folder holds one whole export (the old or the new).
//! - [`fuzz_loop`]: mutated input files (lab, sites, layers, logger, plain pairs) and damaged
//!   campaign files; no panic, no hang, and a refused import writes nothing.
//! - [`concurrency_loop`]: two lab imports, a campaign fit, `set` and `flag` at once; every
//!   command succeeds and no row is lost.
//!
//! Everything is seeded (`rand_chacha`): the same seed gives the same files, mutations and
//! kill delays (where a kill lands still depends on the machine's speed).

#![allow(dead_code)] // the test and the bench use different parts

use std::fmt::Write as _;
use std::path::{Path, PathBuf};
use std::process::{Command, Output, Stdio};
use std::time::{Duration, Instant};

use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rusqlite::Connection;

/// The binary under test.
pub fn binary() -> &'static str {
    env!("CARGO_BIN_EXE_porewise")
}

/// The fixture folder of the repository.
pub fn data_dir() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("tests")
        .join("data")
}

fn run(args: &[&str], dir: &Path) -> Output {
    Command::new(binary())
        .args(args)
        .current_dir(dir)
        .output()
        .expect("run porewise")
}

fn must(args: &[&str], dir: &Path) -> Output {
    let out = run(args, dir);
    assert!(
        out.status.success(),
        "porewise {args:?}: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    out
}

/// A lab sheet of `sites` sites (`{prefix}000`..) with `per_site` samples each over three
/// 20 cm layers, each read at eight suctions; water contents from van Genuchten curves whose
/// parameters step with the sample number (invented, within the usual range of mineral
/// soils: common practice) plus a fixed scatter pattern.
pub fn lab_sheet(prefix: &str, sites: usize, per_site: usize) -> String {
    let vg = porewise::model::retention::ModelKind::VanGenuchten.curve();
    let suctions = [0.0, 10.0, 30.0, 100.0, 330.0, 1000.0, 3000.0, 15000.0];
    let mut text = String::from("site,top_cm,bottom_cm,sample,method,suction_cm,theta\n");
    for site in 0..sites {
        for k in 0..per_site {
            let n = site * per_site + k;
            let step = |period: usize| (n % period) as f64 / period as f64;
            let p = [
                0.02 + 0.08 * step(7),
                0.36 + 0.12 * step(5),
                0.005 * 16f64.powf(step(11)),
                1.2 + 1.2 * step(13),
            ];
            let top = 20 * (k % 3);
            for (i, h) in suctions.iter().enumerate() {
                let scatter = [0.004, -0.003, 0.001, -0.004, 0.002, -0.001][(i + n) % 6];
                let _ = writeln!(
                    text,
                    "{prefix}{site:03},{top},{},{prefix}{site:03}-S{k:05},pressure plate,{h},{:.5}",
                    top + 20,
                    vg.value(*h, &p) + scatter
                );
            }
        }
    }
    text
}

/// Row counts of the campaign's tables (the ones an import or a fit writes).
pub fn counts(db: &Path) -> Vec<i64> {
    let conn = Connection::open(db).expect("open");
    [
        "import_batch",
        "site",
        "layer",
        "sample",
        "reading",
        "logger_sensor",
        "logger_record",
        "flag",
        "fit",
    ]
    .iter()
    .map(|t| {
        conn.query_row(&format!("SELECT count(*) FROM {t}"), [], |r| r.get(0))
            .expect("count")
    })
    .collect()
}

/// What `PRAGMA integrity_check` says (`ok` for a sound file).
pub fn integrity(db: &Path) -> String {
    let conn = Connection::open(db).expect("open");
    conn.query_row("PRAGMA integrity_check", [], |r| r.get::<_, String>(0))
        .unwrap_or_else(|e| e.to_string())
}

/// Whether every recorded fit is whole: at most one current fit per sample, and every
/// successful one carries a report that parses.
pub fn fits_whole(db: &Path) -> bool {
    let conn = Connection::open(db).expect("open");
    let doubled: i64 = conn
        .query_row(
            "SELECT count(*) FROM (SELECT sample_id FROM fit WHERE is_current = 1
             GROUP BY sample_id HAVING count(*) > 1)",
            [],
            |r| r.get(0),
        )
        .expect("count");
    let mut stmt = conn
        .prepare("SELECT report FROM fit WHERE status = 'ok'")
        .expect("prepare");
    let reports = stmt
        .query_map([], |r| r.get::<_, Option<String>>(0))
        .expect("query");
    let mut whole = doubled == 0;
    for report in reports {
        let parsed = report
            .ok()
            .flatten()
            .and_then(|t| serde_json::from_str::<serde_json::Value>(&t).ok());
        whole &= parsed.is_some();
    }
    whole
}

/// Every file of an export folder without its export-time line, by name (sorted).
pub fn export_content(dir: &Path) -> Vec<(String, String)> {
    let Ok(entries) = std::fs::read_dir(dir) else {
        return Vec::new();
    };
    let mut out: Vec<(String, String)> = entries
        .map(|e| {
            let e = e.expect("entry");
            let name = e.file_name().to_string_lossy().into_owned();
            let text = std::fs::read(e.path()).unwrap_or_default();
            let kept: Vec<String> = String::from_utf8_lossy(&text)
                .lines()
                .filter(|l| !l.contains("\"exported_at\"") && !l.contains("class=\"exported\""))
                .map(str::to_string)
                .collect();
            (name, kept.join("\n"))
        })
        .collect();
    out.sort();
    out
}

/// Hidden entries beside or inside an export folder (staging folders, temporary files).
pub fn leftovers(parent: &Path) -> Vec<String> {
    let mut found = Vec::new();
    for dir in [parent.to_path_buf(), parent.join("out")] {
        if let Ok(entries) = std::fs::read_dir(&dir) {
            for e in entries.flatten() {
                let name = e.file_name().to_string_lossy().into_owned();
                if name.starts_with('.') {
                    found.push(name);
                }
            }
        }
    }
    found
}

/// Start a command, kill it with SIGKILL after `delay`; true when it was still running.
fn kill_after(args: &[&str], dir: &Path, delay: Duration) -> bool {
    let mut child = Command::new(binary())
        .args(args)
        .current_dir(dir)
        .stdout(Stdio::null())
        .stderr(Stdio::null())
        .spawn()
        .expect("spawn");
    std::thread::sleep(delay);
    let running = child.try_wait().expect("try_wait").is_none();
    let _ = child.kill();
    let _ = child.wait();
    running
}

fn timed(args: &[&str], dir: &Path) -> Duration {
    let start = Instant::now();
    must(args, dir);
    start.elapsed()
}

/// What the kill loop found.
#[derive(Debug, Default, Clone, PartialEq, Eq)]
pub struct KillFigures {
    /// Kills during a lab import, a fit, an export.
    pub runs: [usize; 3],
    /// Of those, kills that found the command still running.
    pub landed: [usize; 3],
    /// Campaign files that failed `PRAGMA integrity_check` afterwards.
    pub corrupt: usize,
    /// Imports left half-written (reading count neither before nor after).
    pub half_imports: usize,
    /// Fit tables with a doubled current fit or a report that does not parse.
    pub broken_fits: usize,
    /// Export folders holding neither the old nor the new export whole.
    pub mixed_exports: usize,
    /// Hidden files or folders left after the next export.
    pub leftovers: usize,
    /// Campaigns that `porewise list` could not read afterwards.
    pub unreadable: usize,
}

impl KillFigures {
    /// Problems of any kind.
    pub fn problems(&self) -> usize {
        self.corrupt
            + self.half_imports
            + self.broken_fits
            + self.mixed_exports
            + self.leftovers
            + self.unreadable
    }
}

/// `runs` kills spread over a lab import, a fit and an export of a campaign of `samples`
/// samples, each at a seeded delay within the command's measured duration.
pub fn kill_loop(runs: usize, samples: usize, seed: u64) -> KillFigures {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let tmp = tempfile::tempdir().expect("temp dir");
    let dir = tmp.path();
    let per_site = samples.div_ceil(3);
    std::fs::write(dir.join("base.csv"), lab_sheet("B", 3, per_site)).expect("write");
    std::fs::write(dir.join("more.csv"), lab_sheet("M", 3, per_site)).expect("write");
    let more_rows = 3 * per_site as i64 * 8;
    // A template campaign: the base sheet imported, fitted, exported.
    let template = dir.join("template.sqlite");
    let t = template.to_str().expect("utf-8 path");
    must(&["init", t, "--name", "Kill loop"], dir);
    must(&["import", "lab", t, "base.csv"], dir);
    let fit_time = timed(&["fit", t], dir);
    let db = dir.join("c.sqlite");
    let d = db.to_str().expect("utf-8 path").to_string();
    let fresh = |db: &Path| {
        porewise_store_remove(db);
        std::fs::copy(&template, db).expect("copy");
    };
    // The two exports a killed export must leave one of: before and after a change.
    fresh(&db);
    must(&["export", &d, "--to", "old"], dir);
    must(&["set", &d, "--fc-kpa", "10"], dir);
    let export_time = timed(&["export", &d, "--to", "new"], dir);
    let old = export_content(&dir.join("old"));
    let new = export_content(&dir.join("new"));
    fresh(&db);
    let import_time = timed(&["import", "lab", &d, "more.csv"], dir);
    let mut f = KillFigures::default();
    for i in 0..runs {
        let op = i % 3;
        fresh(&db);
        let before = counts(&db);
        let limit = [import_time, fit_time, export_time][op];
        let delay = limit.mul_f64(rng.random_range(0.05..1.0));
        f.runs[op] += 1;
        let landed = match op {
            0 => kill_after(&["import", "lab", &d, "more.csv"], dir, delay),
            1 => kill_after(&["fit", &d], dir, delay),
            _ => {
                let _ = std::fs::remove_dir_all(dir.join("out"));
                copy_dir(&dir.join("old"), &dir.join("out"));
                must(&["set", &d, "--fc-kpa", "10"], dir);
                kill_after(&["export", &d, "--to", "out"], dir, delay)
            }
        };
        f.landed[op] += usize::from(landed);
        if integrity(&db) != "ok" {
            f.corrupt += 1;
            continue;
        }
        let after = counts(&db);
        match op {
            0 => {
                let readings = after[4];
                if readings != before[4] && readings != before[4] + more_rows {
                    f.half_imports += 1;
                }
            }
            1 => f.broken_fits += usize::from(!fits_whole(&db)),
            _ => {
                let content = export_content(&dir.join("out"));
                if content != old && content != new {
                    f.mixed_exports += 1;
                }
                // The next export completes it and leaves nothing behind.
                if run(&["export", &d, "--to", "out"], dir).status.success() {
                    // A killed export's staging folder goes once its process is known gone
                    // (Linux: /proc).
                    if Path::new("/proc/self").exists() {
                        f.leftovers += usize::from(!leftovers(dir).is_empty());
                    }
                    if export_content(&dir.join("out")) != new {
                        f.mixed_exports += 1;
                    }
                } else {
                    f.unreadable += 1;
                }
            }
        }
        f.unreadable += usize::from(!run(&["list", &d, "samples"], dir).status.success());
    }
    f
}

/// Remove a campaign file and its journal (WAL) files.
fn porewise_store_remove(db: &Path) {
    for suffix in ["", "-wal", "-shm", "-writer"] {
        let mut name = db.as_os_str().to_owned();
        name.push(suffix);
        let _ = std::fs::remove_file(PathBuf::from(name));
    }
}

fn copy_dir(from: &Path, to: &Path) {
    std::fs::create_dir_all(to).expect("create");
    for e in std::fs::read_dir(from).expect("read").flatten() {
        std::fs::copy(e.path(), to.join(e.file_name())).expect("copy");
    }
}

/// What the fuzz loop found.
#[derive(Debug, Default, Clone, PartialEq, Eq)]
pub struct FuzzFigures {
    /// Mutated input files run.
    pub inputs: usize,
    /// Of those, accepted (a mutation can leave a file valid).
    pub accepted: usize,
    /// Damaged campaign files run (`list`, `fit`, `export` on each).
    pub campaigns: usize,
    /// Runs that panicked or died of a signal.
    pub panics: usize,
    /// Runs that did not finish within the time limit.
    pub hangs: usize,
    /// Refused imports that changed the campaign anyway.
    pub written_on_error: usize,
    /// Runs with an exit status outside 0, 1, 2 and 3.
    pub odd_exits: usize,
}

impl FuzzFigures {
    /// Problems of any kind.
    pub fn problems(&self) -> usize {
        self.panics + self.hangs + self.written_on_error + self.odd_exits
    }
}

/// Run with a time limit; `None` when it had to be killed.
fn run_limited(args: &[&std::ffi::OsStr], dir: &Path, limit: Duration) -> Option<Output> {
    let mut child = Command::new(binary())
        .args(args)
        .current_dir(dir)
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("spawn");
    let start = Instant::now();
    loop {
        if child.try_wait().expect("try_wait").is_some() {
            return Some(child.wait_with_output().expect("output"));
        }
        if start.elapsed() > limit {
            let _ = child.kill();
            let _ = child.wait();
            return None;
        }
        std::thread::sleep(Duration::from_millis(2));
    }
}

/// Change a file the way a bad export, an editor or a cut transfer might.
fn mutate(bytes: &[u8], rng: &mut ChaCha8Rng) -> Vec<u8> {
    let mut out = bytes.to_vec();
    let edits = rng.random_range(1..=4);
    for _ in 0..edits {
        let len = out.len().max(1);
        let at = rng.random_range(0..len).min(out.len());
        match rng.random_range(0..10) {
            0 => {
                if let Some(b) = out.get_mut(at) {
                    *b ^= 1 << rng.random_range(0..8);
                }
            }
            1 => out.insert(at, rng.random()),
            2 => {
                let end = (at + rng.random_range(1..40)).min(out.len());
                out.drain(at..end);
            }
            3 => out.truncate(at),
            4 => {
                let piece: &[u8] = [
                    &b"NaN"[..],
                    b"inf",
                    b"-1e308",
                    b"1e400",
                    b"\"",
                    b";",
                    b",",
                    b"\n",
                    b"\r\n",
                    b"\xff\xfe",
                    b"\0",
                    b"9999999999999999999999",
                    b"2026-13-45T99:99:99Z",
                    b"\xef\xbb\xbf",
                ][rng.random_range(0..14)];
                for (k, b) in piece.iter().enumerate() {
                    out.insert(at + k, *b);
                }
            }
            5 | 6 => {
                // Duplicate or drop a line.
                let text = String::from_utf8_lossy(&out).into_owned();
                let mut lines: Vec<&str> = text.split('\n').collect();
                let i = rng.random_range(0..lines.len());
                if rng.random() {
                    lines.insert(i, lines[i]);
                } else if lines.len() > 1 {
                    lines.remove(i);
                }
                out = lines.join("\n").into_bytes();
            }
            7 => {
                // Swap two fields of a line.
                let text = String::from_utf8_lossy(&out).into_owned();
                let mut lines: Vec<String> = text.split('\n').map(str::to_string).collect();
                let i = rng.random_range(0..lines.len());
                let mut fields: Vec<&str> = lines[i].split(',').collect();
                if fields.len() > 1 {
                    let a = rng.random_range(0..fields.len());
                    let b = rng.random_range(0..fields.len());
                    fields.swap(a, b);
                    lines[i] = fields.join(",");
                }
                out = lines.join("\n").into_bytes();
            }
            8 => {
                // A very long field.
                let long = vec![b'7'; rng.random_range(100..5000)];
                for (k, b) in long.iter().enumerate() {
                    out.insert(at + k, *b);
                }
            }
            _ => {
                // A digit changed.
                if let Some(b) = out.get_mut(at)
                    && b.is_ascii_digit()
                {
                    *b = b'0' + rng.random_range(0..10u8);
                }
            }
        }
    }
    out
}

/// `inputs` mutated input files and `campaigns` damaged campaign files.
pub fn fuzz_loop(inputs: usize, campaigns: usize, seed: u64) -> FuzzFigures {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let tmp = tempfile::tempdir().expect("temp dir");
    let dir = tmp.path();
    let valid = data_dir().join("valid");
    let template = dir.join("template.sqlite");
    let t = template.to_str().expect("utf-8 path");
    must(&["init", t, "--name", "Fuzz loop"], dir);
    let vs = |f: &str| valid.join(f).to_string_lossy().into_owned();
    must(&["import", "sites", t, &vs("sites.csv")], dir);
    must(&["import", "layers", t, &vs("layers.csv")], dir);
    must(&["import", "lab", t, &vs("lab_kpa.csv")], dir);
    // One sample has too few readings: exit 3, the other fitted.
    assert_eq!(run(&["fit", t], dir).status.code(), Some(3));
    // (file, the command that reads it)
    let seeds: [(&str, &[&str]); 9] = [
        ("lab_kpa.csv", &["import", "lab"]),
        ("lab_gravimetric.csv", &["import", "lab"]),
        ("lab_semicolon_bom.csv", &["import", "lab"]),
        ("sites.csv", &["import", "sites"]),
        ("layers.csv", &["import", "layers"]),
        ("logger_station.csv", &["import", "logger"]),
        ("logger_local_times.csv", &["import", "logger"]),
        ("pairs_two_samples.csv", &["fit", "--input"]),
        ("pairs_semicolon_kpa_pct.csv", &["fit", "--input"]),
    ];
    let originals: Vec<Vec<u8>> = seeds
        .iter()
        .map(|(f, _)| std::fs::read(valid.join(f)).expect("fixture"))
        .collect();
    let limit = Duration::from_secs(20);
    let db = dir.join("c.sqlite");
    let mut f = FuzzFigures::default();
    let judge = |out: Option<Output>, f: &mut FuzzFigures| -> Option<i32> {
        let Some(out) = out else {
            f.hangs += 1;
            return None;
        };
        let err = String::from_utf8_lossy(&out.stderr);
        match out.status.code() {
            None | Some(101) => f.panics += 1,
            Some(0..=3) if !err.contains("panicked") => {}
            Some(_) if err.contains("panicked") => f.panics += 1,
            Some(_) => f.odd_exits += 1,
        }
        out.status.code()
    };
    porewise_store_remove(&db);
    std::fs::copy(&template, &db).expect("copy");
    for case in 0..inputs {
        let pick = case % seeds.len();
        let (name, command) = seeds[pick];
        let file = dir.join(format!("case-{case}-{name}"));
        std::fs::write(&file, mutate(&originals[pick], &mut rng)).expect("write");
        let before = counts(&db);
        let mut args: Vec<&std::ffi::OsStr> = command.iter().map(AsRef::as_ref).collect();
        if command[0] == "import" {
            args.push(db.as_os_str());
        }
        args.push(file.as_os_str());
        if name == "logger_local_times.csv" {
            args.extend([std::ffi::OsStr::new("--utc-offset"), "+01:00".as_ref()]);
        }
        let out = run_limited(&args, dir, limit);
        f.inputs += 1;
        let code = judge(out, &mut f);
        let _ = std::fs::remove_file(&file);
        if command[0] != "import" {
            continue;
        }
        if code == Some(0) {
            f.accepted += 1;
            porewise_store_remove(&db);
            std::fs::copy(&template, &db).expect("copy");
        } else if counts(&db) != before {
            f.written_on_error += 1;
            porewise_store_remove(&db);
            std::fs::copy(&template, &db).expect("copy");
        }
    }
    // Damaged campaign files: bytes flipped, pages zeroed, cut short, or a header changed.
    let original = std::fs::read(&template).expect("template");
    for case in 0..campaigns {
        let mut bytes = original.clone();
        match case % 4 {
            0 => {
                for _ in 0..rng.random_range(1..20) {
                    let at = rng.random_range(0..bytes.len());
                    bytes[at] ^= 1 << rng.random_range(0..8);
                }
            }
            1 => {
                let page = 4096 * rng.random_range(1..bytes.len() / 4096);
                bytes[page..(page + 4096).min(original.len())].fill(0);
            }
            2 => bytes.truncate(rng.random_range(0..bytes.len())),
            _ => {
                let at = rng.random_range(0..100);
                bytes[at] = rng.random();
            }
        }
        let file = dir.join(format!("damaged-{case}.sqlite"));
        std::fs::write(&file, &bytes).expect("write");
        for command in [&["list"][..], &["fit"][..], &["export"][..]] {
            let mut args: Vec<&std::ffi::OsStr> = vec![command[0].as_ref(), file.as_os_str()];
            let out_dir = dir.join(format!("damaged-{case}-out"));
            if command[0] == "export" {
                args.extend(["--to".as_ref(), out_dir.as_os_str()]);
            }
            let out = run_limited(&args, dir, limit);
            judge(out, &mut f);
            let _ = std::fs::remove_dir_all(&out_dir);
        }
        f.campaigns += 1;
        porewise_store_remove(&file);
    }
    f
}

/// What the concurrency loop found.
#[derive(Debug, Default, Clone, PartialEq, Eq)]
pub struct ConcurrencyFigures {
    /// Rounds of two imports, a fit, `set` and `flag` started together.
    pub rounds: usize,
    /// Commands run.
    pub commands: usize,
    /// Commands that failed (a fit that could not fit a sample, exit 3, is not a failure).
    pub failed: usize,
    /// Readings missing after all of them finished.
    pub lost_readings: i64,
    /// Samples without a current fit after the fit finished (and it recorded them).
    pub lost_fits: usize,
}

/// `rounds` rounds of commands started together on one campaign of `samples` samples.
pub fn concurrency_loop(rounds: usize, samples: usize) -> ConcurrencyFigures {
    let tmp = tempfile::tempdir().expect("temp dir");
    let dir = tmp.path();
    let per_site = samples.div_ceil(3);
    std::fs::write(dir.join("base.csv"), lab_sheet("B", 3, per_site)).expect("write");
    std::fs::write(dir.join("a.csv"), lab_sheet("A", 3, per_site)).expect("write");
    std::fs::write(dir.join("b.csv"), lab_sheet("C", 3, per_site)).expect("write");
    let rows = 3 * per_site as i64 * 8;
    let mut f = ConcurrencyFigures::default();
    for round in 0..rounds {
        let db = dir.join(format!("c{round}.sqlite"));
        let d = db.to_str().expect("utf-8 path").to_string();
        must(&["init", &d, "--name", "Concurrency"], dir);
        must(&["import", "lab", &d, "base.csv"], dir);
        let reading: i64 = Connection::open(&db)
            .expect("open")
            .query_row("SELECT min(id) FROM reading", [], |r| r.get(0))
            .expect("reading");
        let reading = reading.to_string();
        let commands: [Vec<&str>; 5] = [
            vec!["fit", &d],
            vec!["import", "lab", &d, "a.csv"],
            vec!["import", "lab", &d, "b.csv"],
            vec!["set", &d, "--fc-kpa", "10"],
            vec!["flag", &d, &reading, "--reason", "concurrency check"],
        ];
        let children: Vec<_> = commands
            .iter()
            .map(|args| {
                Command::new(binary())
                    .args(args)
                    .current_dir(dir)
                    .stdout(Stdio::piped())
                    .stderr(Stdio::piped())
                    .spawn()
                    .expect("spawn")
            })
            .collect();
        let mut fit_out = String::new();
        for (i, child) in children.into_iter().enumerate() {
            let out = child.wait_with_output().expect("wait");
            f.commands += 1;
            let ok = out.status.success() || (i == 0 && out.status.code() == Some(3));
            if !ok {
                f.failed += 1;
            }
            if i == 0 {
                fit_out = String::from_utf8_lossy(&out.stdout).into_owned();
            }
        }
        let after = counts(&db);
        f.lost_readings += (3 * rows - after[4]).max(0);
        // The fit recorded every base sample but the one flagged meanwhile (if the flag came
        // between its read and its write).
        let conn = Connection::open(&db).expect("open");
        let fitted: i64 = conn
            .query_row(
                "SELECT count(DISTINCT sample_id) FROM fit WHERE is_current = 1",
                [],
                |r| r.get(0),
            )
            .expect("count");
        let claimed = fit_out
            .split_whitespace()
            .nth(1)
            .and_then(|n| n.parse::<i64>().ok())
            .unwrap_or(0);
        f.lost_fits += usize::try_from(claimed - fitted).unwrap_or(0);
        f.rounds += 1;
    }
    f
}
