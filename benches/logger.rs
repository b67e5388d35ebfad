//! Logger import speed and memory: a generated file of 2,000,000 logger records through the
//! real binary (`porewise import logger`: hashing, streaming, validation, quality marks,
//! writes in one transaction), beside the `sqlite3` program's own `.import` of the same CSV,
//! in the same run, into two tables with the campaign file's pragmas (WAL, synchronous FULL,
//! 32 MiB page cache):
//!
//! - keyed: the CSV's columns in a table keyed `PRIMARY KEY (sensor_id, time) WITHOUT ROWID`
//!   (the baseline the target is set against: porewise at least 1.5 times its rows/s);
//! - unique: the CSV's columns in a rowid table with `UNIQUE (site, sensor_id, time)` (the key
//!   porewise's table had before schema version 11).
//!
//! Run with `cargo bench --bench logger`. Prints rows per second of each, porewise's ratio to
//! each (by wall and by CPU time) and the peak memory of each process (VmHWM, from
//! `/usr/bin/time -v`; target: under 100 MB whatever the file size, shown by a second file
//! twice as large). Figures, not assertions: a shared 2-core machine is noisy.

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

/// What one run of a command cost.
#[derive(Debug, Clone, Copy)]
struct Cost {
    /// Wall-clock time.
    wall: Duration,
    /// User plus system CPU time (less disturbed than wall time by other work on the machine).
    cpu: Duration,
    /// Peak resident memory, kB.
    peak_kb: u64,
}

/// The cost of a command run under `/usr/bin/time -v`.
fn measure(cmd: &Command, stdin: Option<&str>) -> Cost {
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
    let field = |name: &str| -> f64 {
        err.lines()
            .find_map(|l| l.trim().strip_prefix(name))
            .and_then(|v| v.trim().parse().ok())
            .unwrap_or(0.0)
    };
    Cost {
        wall: elapsed,
        cpu: Duration::from_secs_f64(
            field("User time (seconds):") + field("System time (seconds):"),
        ),
        peak_kb: field("Maximum resident set size (kbytes):") as u64,
    }
}

fn porewise_import(dir: &Path, file: &Path, name: &str, extra: &[&str]) -> Cost {
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

/// The table the sqlite3 program imports into.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Baseline {
    /// `PRIMARY KEY (sensor_id, time) WITHOUT ROWID`.
    Keyed,
    /// A rowid table with `UNIQUE (site, sensor_id, time)`.
    Unique,
}

impl Baseline {
    fn table(self) -> &'static str {
        match self {
            Baseline::Keyed => {
                "CREATE TABLE logger (site TEXT NOT NULL, depth_cm REAL NOT NULL, \
                 sensor TEXT NOT NULL, sensor_id TEXT NOT NULL, time TEXT NOT NULL, \
                 value REAL NOT NULL, unit TEXT NOT NULL, \
                 PRIMARY KEY (sensor_id, time)) WITHOUT ROWID;"
            }
            Baseline::Unique => {
                "CREATE TABLE logger (site TEXT NOT NULL, depth_cm REAL NOT NULL, \
                 sensor TEXT NOT NULL, sensor_id TEXT NOT NULL, time TEXT NOT NULL, \
                 value REAL NOT NULL, unit TEXT NOT NULL, \
                 UNIQUE (site, sensor_id, time)) STRICT;"
            }
        }
    }

    fn label(self) -> &'static str {
        match self {
            Baseline::Keyed => "sqlite3 .import, keyed:",
            Baseline::Unique => "sqlite3 .import, unique:",
        }
    }
}

/// The same CSV by the sqlite3 program's `.import`, with the campaign file's pragmas (WAL,
/// synchronous FULL, 32 MiB page cache).
fn sqlite3_import(dir: &Path, file: &Path, name: &str, baseline: Baseline) -> Cost {
    let db = dir.join(format!("{name}.sqlite"));
    let script = format!(
        "PRAGMA journal_mode = WAL;\nPRAGMA synchronous = FULL;\nPRAGMA cache_size = -32768;\n\
         {}\n.import --csv --skip 1 {} logger\nSELECT count(*) FROM logger;\n",
        baseline.table(),
        file.display()
    );
    let mut cmd = Command::new("/usr/bin/sqlite3");
    cmd.arg(&db);
    measure(&cmd, Some(&script))
}

/// Remove a database and its WAL files.
fn remove_db(dir: &Path, name: &str) {
    for suffix in ["", "-wal", "-shm"] {
        let _ = std::fs::remove_file(dir.join(format!("{name}.sqlite{suffix}")));
    }
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
    let (mut ours, mut keyed, mut unique) = (Vec::new(), Vec::new(), Vec::new());
    for round in 0..ROUNDS {
        // Each round in another order, so no command always runs on a warmer machine.
        let order: [usize; 3] = match round % 3 {
            0 => [0, 1, 2],
            1 => [1, 2, 0],
            _ => [2, 0, 1],
        };
        for which in order {
            match which {
                0 => {
                    let name = format!("porewise-{round}");
                    ours.push(porewise_import(dir.path(), &file, &name, &[]));
                    remove_db(dir.path(), &name);
                }
                1 => {
                    let name = format!("keyed-{round}");
                    keyed.push(sqlite3_import(dir.path(), &file, &name, Baseline::Keyed));
                    remove_db(dir.path(), &name);
                }
                _ => {
                    let name = format!("unique-{round}");
                    unique.push(sqlite3_import(dir.path(), &file, &name, Baseline::Unique));
                    remove_db(dir.path(), &name);
                }
            }
        }
    }
    let rate = |d: Duration| rows as f64 / d.as_secs_f64();
    let report = |name: &str, runs: &[Cost]| {
        let wall = median(runs.iter().map(|c| c.wall).collect());
        let cpu = median(runs.iter().map(|c| c.cpu).collect());
        let peak = runs.iter().map(|c| c.peak_kb).max().unwrap_or(0);
        println!(
            "{name:<26} median wall {:.2} s = {:.0} rows/s (best {:.0}); median CPU {:.2} s = \
             {:.0} rows per CPU-second; peak memory {:.1} MB",
            wall.as_secs_f64(),
            rate(wall),
            rate(runs.iter().map(|c| c.wall).min().unwrap_or(wall)),
            cpu.as_secs_f64(),
            rate(cpu),
            peak as f64 / 1024.0
        );
        (wall, cpu)
    };
    let (ow, oc) = report("porewise import logger:", &ours);
    for (baseline, runs, target) in [
        (Baseline::Keyed, &keyed, 1.5),
        (Baseline::Unique, &unique, 1.0),
    ] {
        let (tw, tc) = report(baseline.label(), runs);
        println!(
            "  ratio porewise / sqlite3 {}: {:.2} by wall time, {:.2} by CPU time \
             (target >= {target:.2} by wall time)",
            match baseline {
                Baseline::Keyed => "keyed (sensor_id, time) WITHOUT ROWID",
                Baseline::Unique => "rowid + UNIQUE (site, sensor_id, time)",
            },
            tw.as_secs_f64() / ow.as_secs_f64(),
            tc.as_secs_f64() / oc.as_secs_f64()
        );
    }
    let dry = porewise_import(dir.path(), &file, "dry-run", &["--dry-run"]);
    remove_db(dir.path(), "dry-run");
    println!(
        "porewise --dry-run:        wall {:.2} s = {:.0} rows/s; peak memory {:.1} MB",
        dry.wall.as_secs_f64(),
        rate(dry.wall),
        dry.peak_kb as f64 / 1024.0
    );
    // Twice the file: memory must stay flat.
    let big = dir.path().join("logger-4m.csv");
    let big_rows = write_file(&big, 20_000);
    let _ = std::fs::remove_file(&file);
    let mb = std::fs::metadata(&big).map_or(0, |x| x.len()) as f64 / 1e6;
    let o = porewise_import(dir.path(), &big, "porewise-4m", &[]);
    remove_db(dir.path(), "porewise-4m");
    let t = sqlite3_import(dir.path(), &big, "keyed-4m", Baseline::Keyed);
    remove_db(dir.path(), "keyed-4m");
    let big_rate = |d: Duration| big_rows as f64 / d.as_secs_f64();
    println!(
        "{big_rows} records ({mb:.1} MB): porewise {:.0} rows/s (CPU {:.0}), peak memory {:.1} MB; \
         sqlite3 keyed {:.0} rows/s (CPU {:.0}), peak memory {:.1} MB",
        big_rate(o.wall),
        big_rate(o.cpu),
        o.peak_kb as f64 / 1024.0,
        big_rate(t.wall),
        big_rate(t.cpu),
        t.peak_kb as f64 / 1024.0
    );
}
