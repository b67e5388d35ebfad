//! Import speed: a generated lab file of 100,000 readings (10,000 samples) through the real
//! import path (reading, hashing, parsing, validation, checks against the campaign, writes),
//! beside a bare rusqlite insert of the same rows into the same tables, in the same run.
//!
//! Run with `cargo bench --bench import`. Prints rows per second for both and their ratio
//! (target: the import at least half the bare rate). Figures, not assertions: a shared
//! 2-core machine is noisy.

use std::fmt::Write as _;
use std::path::Path;
use std::time::{Duration, Instant};

use porewise::import::{ImportKind, ImportOptions, Source, import_files, parse};
use porewise::model::domain::Uid;
use porewise::model::units::SuctionUnit;
use porewise::store::Campaign;
use rusqlite::params;

const SITES: usize = 100;
const LAYERS_PER_SITE: usize = 5;
const SAMPLES_PER_LAYER: usize = 20;
/// Suction steps of one core, kPa, as a lab spaces them.
const STEPS_KPA: [f64; 10] = [0.0, 0.3, 1.0, 3.0, 6.0, 10.0, 33.0, 100.0, 500.0, 1500.0];
const ROUNDS: usize = 5;

/// One reading of the generated campaign, in file units and canonical units.
struct Row {
    site: usize,
    layer: usize,
    sample: usize,
    kpa: f64,
    theta: f64,
    bulk_density: f64,
}

fn sample_code(r: &Row) -> String {
    format!("S{:03}-L{}-C{:02}", r.site, r.layer, r.sample)
}

/// A smooth, plausible retention curve per sample (van Genuchten shape), no randomness.
fn generate() -> Vec<Row> {
    let mut rows =
        Vec::with_capacity(SITES * LAYERS_PER_SITE * SAMPLES_PER_LAYER * STEPS_KPA.len());
    for site in 0..SITES {
        for layer in 0..LAYERS_PER_SITE {
            for sample in 0..SAMPLES_PER_LAYER {
                let k = (site * 7 + layer * 3 + sample) % 17;
                let theta_s = 0.36 + 0.01 * k as f64;
                let theta_r = 0.03 + 0.002 * k as f64;
                let alpha = 0.005 + 0.002 * k as f64;
                let n = 1.3 + 0.05 * k as f64;
                let m = 1.0 - 1.0 / n;
                for kpa in STEPS_KPA {
                    let h = SuctionUnit::Kpa.to_cm(kpa);
                    let se = (1.0 + (alpha * h).powf(n)).powf(-m);
                    rows.push(Row {
                        site,
                        layer,
                        sample,
                        kpa,
                        theta: theta_r + (theta_s - theta_r) * se,
                        bulk_density: 1.2 + 0.02 * k as f64,
                    });
                }
            }
        }
    }
    rows
}

fn write_lab_file(path: &Path, rows: &[Row]) {
    let mut text = String::from(
        "site,top_cm,bottom_cm,sample,method,suction_kpa,theta,measured_on,bulk_density_g_cm3\n",
    );
    for (i, r) in rows.iter().enumerate() {
        let first_of_sample = i % STEPS_KPA.len() == 0;
        let method = if r.kpa < 10.0 {
            "sandbox"
        } else {
            "pressure plate"
        };
        let bd = if first_of_sample {
            format!("{}", r.bulk_density)
        } else {
            String::new()
        };
        let _ = writeln!(
            text,
            "S{:03},{},{},{},{method},{},{:.4},2026-05-{:02},{bd}",
            r.site,
            r.layer * 20,
            r.layer * 20 + 20,
            sample_code(r),
            r.kpa,
            r.theta,
            1 + r.sample % 28
        );
    }
    std::fs::write(path, text).expect("write the lab file");
}

/// The real import of the file into a fresh campaign.
fn run_import(dir: &Path, file: &Path, round: usize) -> Duration {
    let db = dir.join(format!("import-{round}.sqlite"));
    let mut campaign = Campaign::create(&db, "bench", 33.0, 1500.0).expect("campaign");
    let start = Instant::now();
    let summary = import_files(
        &mut campaign,
        ImportKind::Lab,
        &[file.to_path_buf()],
        ImportOptions::default(),
    )
    .expect("the generated file imports");
    let elapsed = start.elapsed();
    assert_eq!(summary.counts.readings_added as usize, rows_total());
    elapsed
}

/// Reading, hashing, parsing and row validation alone (no campaign file).
fn run_parse(file: &Path) -> Duration {
    let start = Instant::now();
    let source = Source::read(file).expect("read");
    let _sha = source.sha256();
    let batch = parse(ImportKind::Lab, &[source]).expect("valid");
    let elapsed = start.elapsed();
    assert_eq!(batch.readings.len(), rows_total());
    elapsed
}

fn rows_total() -> usize {
    SITES * LAYERS_PER_SITE * SAMPLES_PER_LAYER * STEPS_KPA.len()
}

/// The same rows, values already in memory (uids made beforehand), inserted with
/// `prepare_cached` in one transaction.
fn run_bare(dir: &Path, rows: &[Row], round: usize) -> Duration {
    let db = dir.join(format!("bare-{round}.sqlite"));
    let mut campaign = Campaign::create(&db, "bench", 33.0, 1500.0).expect("campaign");
    let site_uids: Vec<Uid> = (0..SITES).map(|_| Uid::random()).collect();
    let layer_uids: Vec<Uid> = (0..SITES * LAYERS_PER_SITE)
        .map(|_| Uid::random())
        .collect();
    let sample_uids: Vec<Uid> = (0..SITES * LAYERS_PER_SITE * SAMPLES_PER_LAYER)
        .map(|_| Uid::random())
        .collect();
    let reading_uids: Vec<Uid> = (0..rows.len()).map(|_| Uid::random()).collect();
    let codes: Vec<String> = rows.iter().map(sample_code).collect();
    let start = Instant::now();
    let tx = campaign.transaction().expect("transaction");
    tx.execute(
        "INSERT INTO import_batch (file_name, sha256, kind, rows, imported_at)
         VALUES ('lab.csv', ?1, 'lab', ?2, '2026-12-02T00:00:00Z')",
        params!["0".repeat(64), rows.len() as i64],
    )
    .expect("batch");
    let batch = tx.last_insert_rowid();
    {
        let mut site = tx
            .prepare_cached("INSERT INTO site (uid, code, batch_id) VALUES (?1, ?2, ?3)")
            .expect("prepare");
        let mut layer = tx
            .prepare_cached(
                "INSERT INTO layer (uid, site_id, top_cm, bottom_cm, batch_id)
                 VALUES (?1, ?2, ?3, ?4, ?5)",
            )
            .expect("prepare");
        let mut sample = tx
            .prepare_cached(
                "INSERT INTO sample (uid, layer_id, code, kind, bulk_density_g_cm3, batch_id)
                 VALUES (?1, ?2, ?3, 'lab_core', ?4, ?5)",
            )
            .expect("prepare");
        let mut reading = tx
            .prepare_cached(
                "INSERT INTO reading (uid, sample_id, h_cm, theta, method, measured_at, branch,
                     batch_id, source_line)
                 VALUES (?1, ?2, ?3, ?4, ?5, ?6, 'unknown', ?7, ?8)",
            )
            .expect("prepare");
        let (mut site_id, mut layer_id, mut sample_id) = (0, 0, 0);
        for (i, r) in rows.iter().enumerate() {
            let first_of_sample = i % STEPS_KPA.len() == 0;
            let first_of_layer = first_of_sample && r.sample == 0;
            if first_of_layer && r.layer == 0 {
                site.execute(params![site_uids[r.site], format!("S{:03}", r.site), batch])
                    .expect("site");
                site_id = tx.last_insert_rowid();
            }
            if first_of_layer {
                layer
                    .execute(params![
                        layer_uids[r.site * LAYERS_PER_SITE + r.layer],
                        site_id,
                        (r.layer * 20) as f64,
                        (r.layer * 20 + 20) as f64,
                        batch
                    ])
                    .expect("layer");
                layer_id = tx.last_insert_rowid();
            }
            if first_of_sample {
                sample
                    .execute(params![
                        sample_uids[i / STEPS_KPA.len()],
                        layer_id,
                        codes[i],
                        r.bulk_density,
                        batch
                    ])
                    .expect("sample");
                sample_id = tx.last_insert_rowid();
            }
            let method = if r.kpa < 10.0 {
                "sandbox"
            } else {
                "pressure plate"
            };
            reading
                .execute(params![
                    reading_uids[i],
                    sample_id,
                    SuctionUnit::Kpa.to_cm(r.kpa),
                    r.theta,
                    method,
                    "2026-05-01",
                    batch,
                    (i + 2) as i64
                ])
                .expect("reading");
        }
    }
    tx.commit().expect("commit");
    start.elapsed()
}

fn rate(d: Duration) -> f64 {
    rows_total() as f64 / d.as_secs_f64()
}

fn main() {
    let dir = tempfile::tempdir().expect("temp dir");
    let rows = generate();
    let file = dir.path().join("lab-100k.csv");
    write_lab_file(&file, &rows);
    let bytes = std::fs::metadata(&file).map_or(0, |m| m.len());
    println!(
        "lab file: {} readings, {} samples, {:.1} MB",
        rows.len(),
        rows.len() / STEPS_KPA.len(),
        bytes as f64 / 1e6
    );
    let mut import_times = Vec::new();
    let mut bare_times = Vec::new();
    let mut parse_times = Vec::new();
    for round in 0..ROUNDS {
        bare_times.push(run_bare(dir.path(), &rows, round));
        import_times.push(run_import(dir.path(), &file, round));
        parse_times.push(run_parse(&file));
    }
    import_times.sort();
    bare_times.sort();
    parse_times.sort();
    let (imp, bare) = (import_times[ROUNDS / 2], bare_times[ROUNDS / 2]);
    println!(
        "import (parse + validate + write): median {:.3} s = {:.0} rows/s (best {:.0})",
        imp.as_secs_f64(),
        rate(imp),
        rate(import_times[0])
    );
    println!(
        "bare rusqlite insert:              median {:.3} s = {:.0} rows/s (best {:.0})",
        bare.as_secs_f64(),
        rate(bare),
        rate(bare_times[0])
    );
    println!(
        "  of which reading + hashing + parsing + row checks: median {:.3} s",
        parse_times[ROUNDS / 2].as_secs_f64()
    );
    println!(
        "ratio import / bare (medians): {:.2} (target >= 0.50)",
        rate(imp) / rate(bare)
    );
}
