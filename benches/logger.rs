//! Logger import speed and memory: a generated file of 2,000,000 logger records through the
//! real binary (`porewise import logger`: hashing, streaming, validation, quality marks,
//! writes in one transaction), beside the `sqlite3` program's own `.import` of the same CSV
//! into a table with the same key (site, sensor_id, time), in the same run.
//!
//! Run with `cargo bench --bench logger`. Prints rows per second of both, their ratio
//! (target: porewise at least the sqlite3 rate) and the peak memory of each process (VmHWM,
//! from `/usr/bin/time -v`; target: under 100 MB whatever the file size, shown by a second
//! file twice as large). Figures, not assertions: a shared 2-core machine is noisy.

use std::fmt::Write as _;
use std::io::{BufWriter, Write};
use std::path::Path;
use std::process::Command;
use std::time::{Duration, Instant};

use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;

/// Sites, depths per site, and one tensiometer plus one water-content sensor per depth.
const SITES: usize = 25;
const DEPTHS: [u32; 4] = [15, 30, 60, 90];
/// 15-minute records, 2026-04-01 00:00 local time (+01:00) onwards.
const START_UTC: i64 = 1_774_998_000;
const INTERVAL_S: i64 = 900;
const ROUNDS: usize = 3;

fn sensors() -> usize {
    SITES * DEPTHS.len() * 2
}

/// Write a logger file of `steps` time steps for every sensor (rows interleaved by time, as a
/// logger network's export is), streaming; returns the number of records.
fn write_file(path: &Path, steps: usize) -> usize {
    let file = std::fs::File::create(path).expect("create the logger file");
    let mut out = BufWriter::with_capacity(1 << 20, file);
    let mut rng = ChaCha8Rng::seed_from_u64(2026);
    // Per sensor: suction (kPa) and water content (%), random walks within plausible ranges.
    let mut kpa: Vec<f64> = (0..SITES * DEPTHS.len())
        .map(|_| rng.random_range(5.0..40.0))
        .collect();
    let mut pct: Vec<f64> = (0..SITES * DEPTHS.len())
        .map(|_| rng.random_range(18.0..38.0))
        .collect();
    writeln!(out, "site,depth_cm,sensor,sensor_id,time,value,unit").expect("write");
    let mut line = String::with_capacity(128);
    for step in 0..steps {
        let local = START_UTC + step as i64 * INTERVAL_S + 3600;
        let t = chrono::DateTime::from_timestamp(local, 0).expect("time");
        let time = t.format("%Y-%m-%dT%H:%M:%S+01:00").to_string();
        for site in 0..SITES {
            for (d, depth) in DEPTHS.iter().enumerate() {
                let k = site * DEPTHS.len() + d;
                // Mean-reverting walks: a season that stays mostly within the working range.
                kpa[k] = (kpa[k] + 0.01 * (30.0 - kpa[k]) + rng.random_range(-0.4..0.4))
                    .clamp(1.0, 95.0);
                pct[k] = (pct[k] + 0.01 * (28.0 - pct[k]) + rng.random_range(-0.12..0.12))
                    .clamp(5.0, 45.0);
                line.clear();
                let _ = writeln!(
                    line,
                    "S{site:02},{depth},tensiometer,T{site:02}-{depth},{time},{:.2},kPa\n\
                     S{site:02},{depth},water_content,W{site:02}-{depth},{time},{:.1},%",
                    -kpa[k], pct[k]
                );
                out.write_all(line.as_bytes()).expect("write");
            }
        }
    }
    out.flush().expect("flush");
    steps * sensors()
}

/// Wall time and peak resident memory (kB) of a command run under `/usr/bin/time -v`.
fn measure(cmd: &Command, stdin: Option<&str>) -> (Duration, u64) {
    let mut timed = Command::new("/usr/bin/time");
    timed.arg("-v").arg(cmd.get_program()).args(cmd.get_args());
    if let Some(dir) = cmd.get_current_dir() {
        timed.current_dir(dir);
    }
    timed.stdin(if stdin.is_some() {
        std::process::Stdio::piped()
    } else {
        std::process::Stdio::null()
    });
    timed.stdout(std::process::Stdio::piped());
    timed.stderr(std::process::Stdio::piped());
    let start = Instant::now();
    let mut child = timed.spawn().expect("run /usr/bin/time");
    if let (Some(text), Some(mut input)) = (stdin, child.stdin.take()) {
        input.write_all(text.as_bytes()).expect("stdin");
    }
    let output = child.wait_with_output().expect("wait");
    let elapsed = start.elapsed();
    let err = String::from_utf8_lossy(&output.stderr);
    assert!(
        output.status.success(),
        "{} failed:\n{}\n{err}",
        cmd.get_program().display(),
        String::from_utf8_lossy(&output.stdout)
    );
    let peak = err
        .lines()
        .find_map(|l| l.trim().strip_prefix("Maximum resident set size (kbytes):"))
        .and_then(|v| v.trim().parse().ok())
        .unwrap_or(0);
    (elapsed, peak)
}

fn porewise_import(dir: &Path, file: &Path, name: &str, extra: &[&str]) -> (Duration, u64) {
    let db = dir.join(format!("{name}.sqlite"));
    let status = Command::new(env!("CARGO_BIN_EXE_porewise"))
        .arg("init")
        .arg(&db)
        .stdout(std::process::Stdio::null())
        .status()
        .expect("porewise init");
    assert!(status.success());
    let mut cmd = Command::new(env!("CARGO_BIN_EXE_porewise"));
    cmd.args(["import", "logger"])
        .arg(&db)
        .arg(file)
        .args(extra);
    measure(&cmd, None)
}

/// The same CSV into a table with the same key, by the sqlite3 program's `.import`, with the
/// campaign file's pragmas (WAL, synchronous FULL, 32 MiB page cache).
fn sqlite3_import(dir: &Path, file: &Path, name: &str) -> (Duration, u64) {
    let db = dir.join(format!("{name}.sqlite"));
    let script = format!(
        "PRAGMA journal_mode = WAL;\nPRAGMA synchronous = FULL;\nPRAGMA cache_size = -32768;\n\
         CREATE TABLE logger (site TEXT NOT NULL, depth_cm REAL NOT NULL, sensor TEXT NOT NULL,\n\
             sensor_id TEXT NOT NULL, time TEXT NOT NULL, value REAL NOT NULL, unit TEXT NOT NULL,\n\
             UNIQUE (site, sensor_id, time)) STRICT;\n\
         .import --csv --skip 1 {} logger\n\
         SELECT count(*) FROM logger;\n",
        file.display()
    );
    let mut cmd = Command::new("/usr/bin/sqlite3");
    cmd.arg(&db);
    measure(&cmd, Some(&script))
}

fn median(mut v: Vec<Duration>) -> Duration {
    v.sort();
    v[v.len() / 2]
}

fn main() {
    for tool in ["/usr/bin/time", "/usr/bin/sqlite3"] {
        if !Path::new(tool).exists() {
            println!("{tool} is missing; this benchmark needs it");
            return;
        }
    }
    let dir = tempfile::tempdir().expect("temp dir");
    let file = dir.path().join("logger-2m.csv");
    let rows = write_file(&file, 10_000);
    let bytes = std::fs::metadata(&file).map_or(0, |m| m.len());
    println!(
        "logger file: {rows} records of {} sensors, {:.1} MB",
        sensors(),
        bytes as f64 / 1e6
    );
    let (mut ours, mut theirs) = (Vec::new(), Vec::new());
    let (mut our_peak, mut their_peak) = (0u64, 0u64);
    for round in 0..ROUNDS {
        let (t, m) = sqlite3_import(dir.path(), &file, &format!("sqlite3-{round}"));
        theirs.push(t);
        their_peak = their_peak.max(m);
        let (t, m) = porewise_import(dir.path(), &file, &format!("porewise-{round}"), &[]);
        ours.push(t);
        our_peak = our_peak.max(m);
        for name in [format!("sqlite3-{round}"), format!("porewise-{round}")] {
            for suffix in ["", "-wal", "-shm"] {
                let _ = std::fs::remove_file(dir.path().join(format!("{name}.sqlite{suffix}")));
            }
        }
    }
    let rate = |d: Duration| rows as f64 / d.as_secs_f64();
    let (o, t) = (median(ours.clone()), median(theirs.clone()));
    println!(
        "porewise import logger: median {:.2} s = {:.0} rows/s (best {:.0}); peak memory {:.1} MB",
        o.as_secs_f64(),
        rate(o),
        rate(*ours.iter().min().expect("rounds")),
        our_peak as f64 / 1024.0
    );
    println!(
        "sqlite3 .import:        median {:.2} s = {:.0} rows/s (best {:.0}); peak memory {:.1} MB",
        t.as_secs_f64(),
        rate(t),
        rate(*theirs.iter().min().expect("rounds")),
        their_peak as f64 / 1024.0
    );
    println!(
        "ratio porewise / sqlite3 (median rates): {:.2} (target >= 1.00)",
        rate(o) / rate(t)
    );
    let (d, m) = porewise_import(dir.path(), &file, "dry-run", &["--dry-run"]);
    println!(
        "porewise --dry-run:     {:.2} s = {:.0} rows/s; peak memory {:.1} MB",
        d.as_secs_f64(),
        rate(d),
        m as f64 / 1024.0
    );
    // Twice the file: memory must stay flat.
    let big = dir.path().join("logger-4m.csv");
    let big_rows = write_file(&big, 20_000);
    let _ = std::fs::remove_file(&file);
    let (d, m) = porewise_import(dir.path(), &big, "porewise-4m", &[]);
    println!(
        "porewise, {big_rows} records ({:.1} MB): {:.2} s = {:.0} rows/s; peak memory {:.1} MB",
        std::fs::metadata(&big).map_or(0, |x| x.len()) as f64 / 1e6,
        d.as_secs_f64(),
        big_rows as f64 / d.as_secs_f64(),
        m as f64 / 1024.0
    );
}
