//! The shared archive at size: push and pull times (wall, CPU) and the client's peak memory
//! for the demo campaign and for a generated campaign of 10,000 samples and 2,000,000 logger
//! records, each through the real binary under `/usr/bin/time -v`, plus what the server
//! holds afterwards. Needs a PostgreSQL server: `POREWISE_TEST_PG` (as `.ci/postgres.sh`
//! prints it); without it the bench says so and stops. Prints figures, asserts nothing on
//! time.
//!
//! `cargo bench --bench archive` (`-- demo` for the demo only).

use std::path::{Path, PathBuf};
use std::process::Command;
use std::time::{Duration, Instant};

use porewise::archive::Target;
use porewise::archive::target::PasswordSources;
use porewise::store::Campaign;
use porewise::store::exchange::{
    self, BatchRow, CampaignRow, CampaignRows, LayerRow, LoggerPoint, LoggerSeries, ReadingRow,
    SampleRow, SiteRow,
};
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;

/// Size of the generated campaign.
const SITES: usize = 100;
const LAYERS_PER_SITE: usize = 4;
const SAMPLES: usize = 10_000;
const READINGS_PER_SAMPLE: usize = 8;
const SENSORS_PER_SITE: usize = 4;
const LOGGER_RECORDS: usize = 2_000_000;

struct Cost {
    wall: Duration,
    cpu: Duration,
    peak_kb: u64,
}

/// Run the binary with `args` under `/usr/bin/time -v`.
fn measure(args: &[&str]) -> (Cost, String) {
    let start = Instant::now();
    let output = Command::new("/usr/bin/time")
        .arg("-v")
        .arg(env!("CARGO_BIN_EXE_porewise"))
        .args(args)
        .output()
        .expect("run /usr/bin/time");
    let wall = start.elapsed();
    let err = String::from_utf8_lossy(&output.stderr);
    let out = String::from_utf8_lossy(&output.stdout).into_owned();
    assert!(
        output.status.success(),
        "porewise {args:?} failed:\n{out}\n{err}"
    );
    let field = |name: &str| -> f64 {
        err.lines()
            .find_map(|l| l.trim().strip_prefix(name))
            .and_then(|v| v.trim().parse().ok())
            .unwrap_or(0.0)
    };
    (
        Cost {
            wall,
            cpu: Duration::from_secs_f64(
                field("User time (seconds):") + field("System time (seconds):"),
            ),
            peak_kb: field("Maximum resident set size (kbytes):") as u64,
        },
        out,
    )
}

fn row(what: &str, cost: &Cost) {
    println!(
        "  {what:<46} {:>8.2} s wall {:>8.2} s cpu {:>8.1} MB peak",
        cost.wall.as_secs_f64(),
        cost.cpu.as_secs_f64(),
        cost.peak_kb as f64 / 1024.0
    );
}

fn sql(url: &str, statement: &str) -> Vec<postgres::Row> {
    let target = Target::parse(url, &PasswordSources::default()).expect("url");
    let mut client = porewise::archive::connect(&target).expect("connect");
    client.query(statement, &[]).expect("query")
}

/// The archive's size on the server, MB (tables and indexes of the schema).
fn server_mb(url: &str, schema: &str) -> f64 {
    let rows = sql(
        url,
        &format!(
            "SELECT coalesce(sum(pg_total_relation_size(c.oid)), 0)::float8 / 1048576
             FROM pg_class c JOIN pg_namespace n ON n.oid = c.relnamespace
             WHERE n.nspname = '{schema}' AND c.relkind = 'r'"
        ),
    );
    rows[0].get(0)
}

fn file_mb(path: &Path) -> f64 {
    std::fs::metadata(path).map_or(0.0, |m| m.len() as f64 / 1_048_576.0)
}

/// Push, push again, edit and push, pull, push the pulled file: the figures of one campaign.
fn round(url: &str, schema: &str, db: &Path, name: &str, edit: &str) {
    let dir = db.parent().expect("dir");
    let (cost, _) = measure(&["push", db.to_str().expect("path"), url]);
    row("push (new to the archive)", &cost);
    let (cost, _) = measure(&["push", db.to_str().expect("path"), url]);
    row("push again (unchanged: fingerprint only)", &cost);
    rusqlite::Connection::open(db)
        .expect("open")
        .execute_batch(edit)
        .expect("edit");
    let (cost, out) = measure(&["push", db.to_str().expect("path"), url, "--prefer", "local"]);
    row("push after an edit (read, plan, apply)", &cost);
    let written = out
        .lines()
        .filter(|l| l.starts_with("sites") || l.starts_with("logger"))
        .collect::<Vec<_>>()
        .join(" | ");
    println!("    {written}");
    let pulled = dir.join(format!("{name}-pulled.sqlite"));
    let _ = std::fs::remove_file(&pulled);
    let (cost, _) = measure(&[
        "pull",
        url,
        "--campaign",
        name,
        pulled.to_str().expect("path"),
    ]);
    row("pull into a new file (with its check)", &cost);
    let (cost, _) = measure(&["push", pulled.to_str().expect("path"), url]);
    row("push the pulled file (unchanged)", &cost);
    println!(
        "  campaign file {:.1} MB, pulled file {:.1} MB, archive schema on the server {:.1} MB",
        file_mb(db),
        file_mb(&pulled),
        server_mb(url, schema)
    );
}

fn uid(rng: &mut ChaCha8Rng) -> String {
    uuid::Builder::from_random_bytes(rng.random())
        .into_uuid()
        .to_string()
}

/// A seeded campaign of the generated size, made in memory.
fn generated() -> CampaignRows {
    let mut rng = ChaCha8Rng::seed_from_u64(2026);
    let batch = |rng: &mut ChaCha8Rng, kind: &str, rows: usize| BatchRow {
        uid: uid(rng),
        file_name: format!("{kind}.csv"),
        sha256: "0".repeat(64),
        kind: kind.to_string(),
        rows: rows as i64,
        forced: false,
        imported_at: "2030-01-01T00:00:00Z".to_string(),
    };
    let batches = vec![
        batch(&mut rng, "sites", SITES),
        batch(&mut rng, "layers", SITES * LAYERS_PER_SITE),
        batch(&mut rng, "lab", SAMPLES * READINGS_PER_SAMPLE),
        batch(&mut rng, "logger", LOGGER_RECORDS),
    ];
    let sites: Vec<SiteRow> = (0..SITES)
        .map(|i| SiteRow {
            uid: uid(&mut rng),
            code: format!("G{i:03}"),
            name: Some(format!("generated site {i}")),
            latitude: Some(rng.random_range(-60.0..60.0)),
            longitude: Some(rng.random_range(-170.0..170.0)),
            elevation_m: Some(rng.random_range(0.0..900.0)),
            notes: None,
            batch_uid: Some(batches[0].uid.clone()),
        })
        .collect();
    let mut layers = Vec::new();
    for s in &sites {
        for k in 0..LAYERS_PER_SITE {
            let clay: f64 = rng.random_range(5.0..50.0);
            let sand: f64 = rng.random_range(5.0..(95.0 - clay));
            layers.push(LayerRow {
                uid: uid(&mut rng),
                site_uid: s.uid.clone(),
                top_cm: 25.0 * k as f64,
                bottom_cm: 25.0 * (k + 1) as f64,
                horizon: Some(["Ap", "A2", "Bw", "C"][k].to_string()),
                sand_pct: Some(sand),
                silt_pct: Some(100.0 - sand - clay),
                clay_pct: Some(clay),
                organic_carbon_pct: None,
                bulk_density_g_cm3: Some(rng.random_range(1.1..1.6)),
                ks_cm_per_day: None,
                batch_uid: Some(batches[1].uid.clone()),
            });
        }
    }
    let suctions = [0.0, 10.0, 33.0, 100.0, 330.0, 1000.0, 5000.0, 15300.0];
    let mut samples = Vec::with_capacity(SAMPLES);
    let mut readings = Vec::with_capacity(SAMPLES * READINGS_PER_SAMPLE);
    for i in 0..SAMPLES {
        let layer = &layers[i % layers.len()];
        let sample = SampleRow {
            uid: uid(&mut rng),
            layer_uid: layer.uid.clone(),
            code: format!("G-{i:05}"),
            kind: "lab_core".to_string(),
            collected_on: Some("2030-05-01".to_string()),
            bulk_density_g_cm3: None,
            notes: None,
            batch_uid: Some(batches[2].uid.clone()),
            ks_cm_per_day: None,
            ks_batch_uid: None,
        };
        let (ts, tr, alpha, n): (f64, f64, f64, f64) = (
            rng.random_range(0.35..0.5),
            rng.random_range(0.02..0.1),
            rng.random_range(0.005..0.1),
            rng.random_range(1.1..2.5),
        );
        for (k, h) in suctions.iter().take(READINGS_PER_SAMPLE).enumerate() {
            let se = (1.0 + (alpha * h).powf(n)).powf(-(1.0 - 1.0 / n));
            // theta from van Genuchten (1980), eq. 21 with m = 1 - 1/n (common practice).
            readings.push(ReadingRow {
                uid: uid(&mut rng),
                sample_uid: sample.uid.clone(),
                h_cm: *h,
                theta: tr + (ts - tr) * se,
                method: Some("plate".to_string()),
                measured_at: None,
                branch: "drying".to_string(),
                weight: None,
                notes: None,
                batch_uid: Some(batches[2].uid.clone()),
                source_line: Some((i * READINGS_PER_SAMPLE + k + 2) as i64),
            });
        }
        samples.push(sample);
    }
    let per_sensor = LOGGER_RECORDS / (SITES * SENSORS_PER_SITE);
    let mut logger = Vec::new();
    let mut line = 1;
    for s in &sites {
        for k in 0..SENSORS_PER_SITE {
            let water = k % 2 == 0;
            let points = (0..per_sensor)
                .map(|t| {
                    line += 1;
                    let minutes = 15 * t;
                    let (day, rest) = (minutes / 1440, minutes % 1440);
                    let date = chrono::NaiveDate::from_ymd_opt(2030, 1, 1).expect("day")
                        + chrono::Duration::days(day as i64);
                    LoggerPoint {
                        time: format!("{date}T{:02}:{:02}:00Z", rest / 60, rest % 60),
                        depth_cm: 20.0 * (k / 2 + 1) as f64,
                        sensor: if water {
                            "water_content"
                        } else {
                            "tensiometer"
                        }
                        .to_string(),
                        value: if water {
                            rng.random_range(0.1..0.4)
                        } else {
                            rng.random_range(10.0..800.0)
                        },
                        batch: 0,
                        source_line: Some(line),
                    }
                })
                .collect();
            logger.push(LoggerSeries {
                site_uid: s.uid.clone(),
                sensor_id: format!("{}-{}", if water { "wc" } else { "tens" }, k),
                batch_uids: vec![Some(batches[3].uid.clone())],
                points,
            });
        }
    }
    logger.sort_by(|a, b| (&a.site_uid, &a.sensor_id).cmp(&(&b.site_uid, &b.sensor_id)));
    CampaignRows {
        campaign: CampaignRow {
            uid: uid(&mut rng),
            name: "generated".to_string(),
            description: Some("seeded campaign for the archive bench".to_string()),
            fc_kpa: 33.0,
            pwp_kpa: 1500.0,
            created_at: "2030-01-01T00:00:00Z".to_string(),
            texture_prior_max_readings: None,
        },
        batches,
        sites,
        layers,
        samples,
        readings,
        conductivity: Vec::new(),
        logger,
        flags: Vec::new(),
        flag_events: Vec::new(),
        fits: Vec::new(),
    }
}

/// The generated campaign as a file (through the merge engine's apply, as pull writes one).
fn generated_file(dir: &Path) -> PathBuf {
    let rows = generated();
    let path = dir.join("generated.sqlite");
    let start = Instant::now();
    let mut campaign = Campaign::create(&path, "generated", 33.0, 1500.0).expect("create");
    let plan = exchange::recreate(&rows);
    let tx = campaign.transaction().expect("tx");
    exchange::apply(&tx, &plan).expect("apply");
    tx.commit().expect("commit");
    drop(campaign);
    println!(
        "  generated {} samples, {} readings, {} logger records; written in {:.1} s",
        rows.samples.len(),
        rows.readings.len(),
        rows.logger_records(),
        start.elapsed().as_secs_f64()
    );
    path
}

fn main() {
    let Some(server) = std::env::var("POREWISE_TEST_PG")
        .ok()
        .filter(|u| !u.is_empty())
    else {
        println!("archive bench skipped: POREWISE_TEST_PG not set (see .ci/postgres.sh)");
        return;
    };
    assert!(Path::new("/usr/bin/time").exists(), "needs /usr/bin/time");
    let only_demo = std::env::args().any(|a| a == "demo");
    let schema = "bench_archive";
    sql(&server, &format!("DROP SCHEMA IF EXISTS {schema} CASCADE"));
    let sep = if server.contains('?') { '&' } else { '?' };
    let url = format!("{server}{sep}schema={schema}");
    let (cost, _) = measure(&["archive", "init", &url]);
    row("archive init", &cost);

    let dir = tempfile::tempdir().expect("temp dir");
    let src = Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-db");
    for file in porewise::demo::generate() {
        std::fs::copy(src.join(file.name), dir.path().join(file.name)).expect("copy");
    }
    let demo = porewise::cli::demo::ensure_built(dir.path()).expect("demo");
    println!("demo campaign");
    round(
        &url,
        schema,
        &demo,
        "Floodplain demo (invented)",
        "UPDATE site SET name = name || ' (edited)' WHERE code = 'LEV1'",
    );
    if only_demo {
        return;
    }
    println!("generated campaign");
    let db = generated_file(dir.path());
    round(
        &url,
        schema,
        &db,
        "generated",
        "UPDATE site SET name = name || ' (edited)' WHERE code = 'G001';
         INSERT INTO logger_record (logger_sensor_id, time_s, value)
         SELECT logger_sensor_id, time_s + 400 * 86400, value
         FROM logger_record WHERE id <= 1000;",
    );
}
