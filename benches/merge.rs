//! Merge speed and memory: `store::exchange` read, plan and apply on the demo campaign and on
//! a generated campaign of 10,000 samples (8 readings each) and 2,000,000 logger records,
//! and the whole `porewise merge` through the real binary.
//!
//! Run with `cargo bench --bench merge`. Prints seconds per step and the process's peak
//! memory (VmHWM) after each scenario. Figures, not assertions: a shared 2-core machine is
//! noisy. `POREWISE_BENCH_LOGGER=N` changes the number of logger records.

use std::path::{Path, PathBuf};
use std::process::Command;
use std::time::Instant;

use porewise::store::Campaign;
use porewise::store::exchange::{self, Preferences};
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rusqlite::{Connection, params};

const SITES: usize = 25;
const SAMPLES: usize = 10_000;
const SUCTIONS_CM: [f64; 8] = [0.0, 10.0, 30.0, 100.0, 330.0, 1000.0, 3000.0, 15000.0];
/// Sensors per site: four depths, a tensiometer and a water-content sensor at each.
const SENSORS: usize = 8;

fn peak_kib() -> u64 {
    std::fs::read_to_string("/proc/self/status")
        .ok()
        .and_then(|s| {
            s.lines()
                .find(|l| l.starts_with("VmHWM:"))
                .and_then(|l| l.split_whitespace().nth(1).and_then(|n| n.parse().ok()))
        })
        .unwrap_or(0)
}

fn uid(rng: &mut ChaCha8Rng) -> String {
    let b: [u8; 16] = rng.random();
    let h = porewise::model::number::hex(&b);
    format!(
        "{}-{}-4{}-8{}-{}",
        &h[0..8],
        &h[8..12],
        &h[13..16],
        &h[17..20],
        &h[20..32]
    )
}

/// A generated campaign: 25 sites, three layers each, 10,000 lab cores with 8 readings, and
/// `records` logger records spread over 8 sensors a site at 15-minute steps (invented values).
fn generate(path: &Path, records: usize) {
    let mut campaign = Campaign::create(path, "Merge bench", 33.0, 1500.0).expect("create");
    let tx = campaign.transaction().expect("tx");
    let mut rng = ChaCha8Rng::seed_from_u64(1818);
    {
        let mut site = tx
            .prepare("INSERT INTO site (uid, code) VALUES (?1, ?2)")
            .expect("prepare");
        let mut layer = tx
            .prepare("INSERT INTO layer (uid, site_id, top_cm, bottom_cm) VALUES (?1, ?2, ?3, ?4)")
            .expect("prepare");
        for s in 0..SITES {
            site.execute(params![uid(&mut rng), format!("G{s:03}")])
                .expect("site");
            let id = tx.last_insert_rowid();
            for d in 0..3 {
                layer
                    .execute(params![
                        uid(&mut rng),
                        id,
                        f64::from(d * 20),
                        f64::from(d * 20 + 20)
                    ])
                    .expect("layer");
            }
        }
        let mut sample = tx
            .prepare(
                "INSERT INTO sample (uid, layer_id, code, kind) VALUES (?1, ?2, ?3, 'lab_core')",
            )
            .expect("prepare");
        let mut reading = tx
            .prepare(
                "INSERT INTO reading (uid, sample_id, h_cm, theta, method) \
                 VALUES (?1, ?2, ?3, ?4, 'pressure plate')",
            )
            .expect("prepare");
        for m in 0..SAMPLES {
            let layer = 1 + (m % (SITES * 3)) as i64;
            sample
                .execute(params![uid(&mut rng), layer, format!("C{m:05}")])
                .expect("sample");
            let id = tx.last_insert_rowid();
            let (tr, ts, alpha, n) = (
                rng.random_range(0.02..0.10),
                rng.random_range(0.36..0.48),
                rng.random_range(0.005..0.08),
                rng.random_range(1.2..2.4),
            );
            for h in SUCTIONS_CM {
                let se = (1.0 + (alpha * h).powf(n)).powf(-(1.0 - 1.0 / n));
                reading
                    .execute(params![uid(&mut rng), id, h, tr + (ts - tr) * se])
                    .expect("reading");
            }
        }
        let mut record = tx
            .prepare(
                "INSERT INTO logger_record (logger_sensor_id, time_s, value) \
                 VALUES ((SELECT id FROM logger_sensor WHERE site_id = ?1 AND sensor_id = ?4), \
                         unixepoch(?5), ?6)",
            )
            .expect("prepare");
        let per_sensor = records.div_ceil(SITES * SENSORS);
        let start = chrono::DateTime::from_timestamp(1_774_998_000, 0).expect("time");
        let mut written = 0;
        'all: for s in 0..SITES {
            for k in 0..SENSORS {
                let tensiometer = k % 2 == 0;
                let depth = [15.0, 30.0, 60.0, 90.0][k / 2];
                let sensor_id = format!("{}{}", if tensiometer { "T" } else { "W" }, depth);
                tx.execute(
                    "INSERT INTO logger_sensor (site_id, sensor_id, depth_cm, sensor) \
                     VALUES (?1, ?2, ?3, ?4)",
                    params![
                        1 + s as i64,
                        sensor_id,
                        depth,
                        if tensiometer {
                            "tensiometer"
                        } else {
                            "water_content"
                        }
                    ],
                )
                .expect("sensor");
                for step in 0..per_sensor {
                    if written == records {
                        break 'all;
                    }
                    let t = start + chrono::Duration::minutes(15 * step as i64);
                    let value = if tensiometer {
                        rng.random_range(50.0..400.0)
                    } else {
                        rng.random_range(0.15..0.40)
                    };
                    record
                        .execute(params![
                            1 + s as i64,
                            depth,
                            if tensiometer {
                                "tensiometer"
                            } else {
                                "water_content"
                            },
                            sensor_id,
                            t.format("%Y-%m-%dT%H:%M:%SZ").to_string(),
                            value
                        ])
                        .expect("record");
                    written += 1;
                }
            }
        }
    }
    tx.commit().expect("commit");
}

fn seconds(since: Instant) -> f64 {
    since.elapsed().as_secs_f64()
}

/// Read INTO and FROM, plan, apply in one transaction; print each step.
fn library_merge(label: &str, into: &Path, from: &Path) {
    let t = Instant::now();
    let mut campaign = Campaign::open(into).expect("open into");
    let mine = exchange::read(campaign.connection()).expect("read into");
    let read_into = seconds(t);
    let t = Instant::now();
    let theirs = exchange::read(&Connection::open(from).expect("open from")).expect("read from");
    let read_from = seconds(t);
    let t = Instant::now();
    let mut prefs = Preferences::default();
    prefs.add("from").expect("prefer");
    prefs.allow_other_campaign = true;
    let plan = exchange::plan(&mine, &theirs, &prefs);
    let planned = seconds(t);
    let t = Instant::now();
    let tx = campaign.transaction().expect("tx");
    let applied = exchange::apply(&tx, &plan).expect("apply");
    tx.commit().expect("commit");
    let written = seconds(t);
    let inserted: usize = applied.inserted.values().sum();
    println!(
        "{label:<44} read INTO {read_into:6.2} s, read FROM {read_from:6.2} s, plan {planned:6.2} s, \
         apply {written:6.2} s ({inserted} rows inserted); peak {} MiB",
        peak_kib() / 1024
    );
}

fn binary_merge(label: &str, into: &Path, from: &Path, extra: &[&str]) {
    let t = Instant::now();
    let out = Command::new(env!("CARGO_BIN_EXE_porewise"))
        .arg("merge")
        .arg(into)
        .arg(from)
        .args(extra)
        .output()
        .expect("run porewise merge");
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    println!("{label:<44} porewise merge {:6.2} s", seconds(t));
}

fn copy(from: &Path, to: &Path) {
    let _ = std::fs::remove_file(to);
    std::fs::copy(from, to).expect("copy");
}

fn main() {
    let tmp = tempfile::tempdir().expect("temp dir");
    let dir = tmp.path();

    // The demo campaign.
    let src = Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-db");
    for file in porewise::demo::generate() {
        std::fs::copy(src.join(file.name), dir.join(file.name)).expect("copy demo source");
    }
    let demo = porewise::cli::demo::ensure_built(dir).expect("demo builds");
    let a = dir.join("demo-a.sqlite");
    let b = dir.join("demo-b.sqlite");
    copy(&demo, &a);
    copy(&demo, &b);
    binary_merge("demo, identical copies", &a, &b, &[]);
    Connection::open(&b)
        .expect("open")
        .execute_batch("UPDATE reading SET theta = theta + 0.001 WHERE id % 10 = 0")
        .expect("edit");
    binary_merge(
        "demo, every tenth reading changed",
        &a,
        &b,
        &["--prefer", "from"],
    );
    let empty = dir.join("demo-empty.sqlite");
    Campaign::create(&empty, "empty", 33.0, 1500.0).expect("create");
    library_merge("demo into an empty file", &empty, &demo);

    // The generated campaign.
    let records: usize = std::env::var("POREWISE_BENCH_LOGGER")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(2_000_000);
    let big = dir.join("big.sqlite");
    let t = Instant::now();
    generate(&big, records);
    println!(
        "generated {SAMPLES} samples, {} readings, {records} logger records in {:.1} s",
        SAMPLES * SUCTIONS_CM.len(),
        seconds(t)
    );
    let big_a = dir.join("big-a.sqlite");
    let big_b = dir.join("big-b.sqlite");
    copy(&big, &big_a);
    copy(&big, &big_b);
    library_merge("generated, identical copies", &big_a, &big_b);
    binary_merge("generated, identical copies", &big_a, &big_b, &[]);
    // B logs 10 % more (new times on every sensor) and corrects 1,000 readings.
    {
        let conn = Connection::open(&big_b).expect("open");
        conn.execute_batch(&format!(
            "BEGIN;
             INSERT INTO logger_record (logger_sensor_id, time_s, value)
               SELECT logger_sensor_id, time_s + {} * 86400, value
               FROM logger_record WHERE id % 10 = 0;
             UPDATE reading SET theta = theta * 0.99 WHERE id % 80 = 1;
             COMMIT;",
            3650
        ))
        .expect("edit b");
    }
    binary_merge(
        "generated, 10 % more logger records in FROM",
        &big_a,
        &big_b,
        &["--prefer", "from"],
    );
    let big_empty = dir.join("big-empty.sqlite");
    Campaign::create(&big_empty, "empty", 33.0, 1500.0).expect("create");
    library_merge("generated into an empty file", &big_empty, &big);
    let files: Vec<PathBuf> = vec![big_a, big_b, big_empty];
    for f in files {
        let size = std::fs::metadata(&f).map_or(0, |m| m.len());
        println!("{}: {} MiB", f.display(), size >> 20);
    }
}
