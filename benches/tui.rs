//! Terminal UI speed on a large campaign: 10,000 samples and 1,000,000 readings.
//!
//! Run with `cargo bench --bench tui`. Builds the campaign in a temporary file (rows inserted
//! directly with rusqlite in one transaction; one sample fitted for real, its fit copied to the
//! others as current fits, one sample in a hundred with an open suggestion), then prints:
//!
//! - start to first frame: open the file, load the tree (outline, fit standings, flag counts;
//!   no reading is read), draw one frame into a `TestBackend` (target < 300 ms);
//! - per pane, the time to draw one frame into a `TestBackend` at 100x30 and 200x60
//!   (target < 10 ms);
//! - what a key costs when it loads data: selecting a sample, reloading the tree after a
//!   refit, the depth view of a site, the review queue, the logger series of a depth
//!   (1,000,000 records of two sensors at the first site, thinned per column as they stream).
//!
//! Figures, not assertions: a shared 2-core machine is noisy, so each is the median of
//! several runs with the minimum beside it.

use std::fmt::Write as _;
use std::path::Path;
use std::time::{Duration, Instant};

use porewise::analysis::{ModelChoice, fit_campaign};
use porewise::fit::FitOptions;
use porewise::model::units::CM_PER_KPA;
use porewise::store::Campaign;
use porewise::store::fits::Selection;
use porewise::tui::action::Action;
use porewise::tui::keymap::Key;
use porewise::tui::runtime::{Session, SessionOptions};
use ratatui::Terminal;
use ratatui::backend::TestBackend;
use ratatui::crossterm::event::KeyCode;
use rusqlite::params;

const SITES: usize = 100;
const LAYERS_PER_SITE: usize = 10;
const SAMPLES_PER_LAYER: usize = 10;
const READINGS_PER_SAMPLE: usize = 100;
/// Logger records per sensor at the first site (a tensiometer and a water-content probe at
/// 10 cm, one record a minute: about a year).
const RECORDS_PER_SENSOR: i64 = 500_000;

fn uid(kind: u32, n: i64) -> String {
    format!("00000000-0000-4{kind:03x}-8000-{n:012x}")
}

/// Build the campaign; returns how long it took.
fn build(path: &Path) -> Duration {
    let start = Instant::now();
    let mut campaign = Campaign::create(path, "Bench campaign", 33.0, 1500.0).expect("create");
    {
        let tx = campaign.transaction().expect("tx");
        let mut site_stmt = tx
            .prepare("INSERT INTO site (id, uid, code, name) VALUES (?1, ?2, ?3, ?4)")
            .expect("prepare");
        let mut layer_stmt = tx
            .prepare(
                "INSERT INTO layer (id, uid, site_id, top_cm, bottom_cm, horizon)
                 VALUES (?1, ?2, ?3, ?4, ?5, ?6)",
            )
            .expect("prepare");
        let mut sample_stmt = tx
            .prepare(
                "INSERT INTO sample (id, uid, layer_id, code, kind) VALUES (?1, ?2, ?3, ?4, 'lab_core')",
            )
            .expect("prepare");
        let mut reading_stmt = tx
            .prepare(
                "INSERT INTO reading (id, uid, sample_id, h_cm, theta, method) VALUES (?1, ?2, ?3, ?4, ?5, ?6)",
            )
            .expect("prepare");
        let (mut layer_id, mut sample_id, mut reading_id) = (0_i64, 0_i64, 0_i64);
        for site in 0..SITES {
            let site_id = site as i64 + 1;
            site_stmt
                .execute(params![
                    site_id,
                    uid(1, site_id),
                    format!("S{site:03}"),
                    format!("Bench site {site}")
                ])
                .expect("site");
            for layer in 0..LAYERS_PER_SITE {
                layer_id += 1;
                let top = (layer * 15) as f64;
                layer_stmt
                    .execute(params![
                        layer_id,
                        uid(2, layer_id),
                        site_id,
                        top,
                        top + 15.0,
                        format!("H{layer}")
                    ])
                    .expect("layer");
                for sample in 0..SAMPLES_PER_LAYER {
                    sample_id += 1;
                    sample_stmt
                        .execute(params![
                            sample_id,
                            uid(3, sample_id),
                            layer_id,
                            format!("S{site:03}-L{layer}-C{sample}")
                        ])
                        .expect("sample");
                    let k = (site * 7 + layer * 3 + sample) % 17;
                    let (theta_r, theta_s) = (0.03 + 0.002 * k as f64, 0.36 + 0.01 * k as f64);
                    let (alpha, n) = (0.005 + 0.002 * k as f64, 1.3 + 0.05 * k as f64);
                    for i in 0..READINGS_PER_SAMPLE {
                        reading_id += 1;
                        // Suctions from 0 to 1500 kPa, evenly on a log scale above 0.1 kPa.
                        let kpa = if i == 0 {
                            0.0
                        } else {
                            10f64.powf(-1.0 + 4.2 * i as f64 / (READINGS_PER_SAMPLE - 1) as f64)
                        };
                        let h = kpa * CM_PER_KPA;
                        let se = (1.0 + (alpha * h).powf(n)).powf(-(1.0 - 1.0 / n));
                        let wiggle = 0.003 * (((reading_id * 37) % 11) as f64 - 5.0) / 5.0;
                        let theta = (theta_r + (theta_s - theta_r) * se + wiggle).clamp(0.0, 1.0);
                        reading_stmt
                            .execute(params![
                                reading_id,
                                uid(4, reading_id),
                                sample_id,
                                h,
                                theta,
                                if kpa < 10.0 {
                                    "sandbox"
                                } else {
                                    "pressure plate"
                                }
                            ])
                            .expect("reading");
                    }
                }
            }
        }
        drop((site_stmt, layer_stmt, sample_stmt, reading_stmt));
        tx.execute_batch(
            "INSERT INTO logger_sensor (site_id, sensor_id, depth_cm, sensor)
             VALUES (1, 'T10', 10, 'tensiometer'), (1, 'W10', 10, 'water_content');",
        )
        .expect("sensors");
        let mut record_stmt = tx
            .prepare(
                "INSERT INTO logger_record (logger_sensor_id, time_s, value)
                 VALUES ((SELECT id FROM logger_sensor WHERE site_id = 1 AND sensor = ?1
                          AND sensor_id = ?2), unixepoch(?3), ?4)",
            )
            .expect("prepare");
        let start = 1_767_225_600; // 2026-01-01T00:00:00Z
        for i in 0..RECORDS_PER_SENSOR {
            let time = porewise::field::time::utc_string(start + 60 * i);
            // A daily cycle on a slow drying trend.
            let day = i as f64 / 1440.0;
            let h = 20.0
                * (0.01 * (day % 40.0)).exp()
                * (1.0 + 0.1 * (day * std::f64::consts::TAU).sin());
            record_stmt
                .execute(params!["tensiometer", "T10", time, h])
                .expect("record");
            record_stmt
                .execute(params![
                    "water_content",
                    "W10",
                    time,
                    0.3 - 0.0004 * (day % 40.0)
                ])
                .expect("record");
        }
        drop(record_stmt);
        tx.execute(
            "INSERT INTO flag (logger_record_id, reason, origin, status, created_at)
             SELECT id, 'bench mark', 'auto', 'suggested', '2026-01-01T00:00:00Z'
             FROM logger_record WHERE id % 10000 = 7",
            [],
        )
        .expect("logger flags");
        tx.commit().expect("commit");
    }
    // One real fit (with its diagnostics), copied as the current fit of every other sample.
    fit_campaign(
        &mut campaign,
        &Selection {
            samples: vec!["S000-L0-C0".into()],
            ..Selection::default()
        },
        ModelChoice::Auto,
        &FitOptions::new(),
        &|_, _| {},
    )
    .expect("fit");
    let tx = campaign.transaction().expect("tx");
    tx.execute(
        "INSERT INTO fit (sample_id, model, parameters, standard_errors, covariance, statistics,
             n_points, readings_fingerprint, created_at, is_current, status, message, requested,
             fixed, report, ranking, reading_ids, sample_rev)
         SELECT m.id, f.model, f.parameters, f.standard_errors, f.covariance, f.statistics,
             f.n_points, f.readings_fingerprint, f.created_at, 1, f.status, f.message, f.requested,
             f.fixed, f.report, f.ranking, f.reading_ids, m.readings_rev
         FROM fit f, sample m WHERE f.sample_id = 1 AND f.is_current = 1 AND m.id <> 1",
        [],
    )
    .expect("copy fits");
    tx.execute(
        "INSERT INTO flag (reading_id, reason, score, origin, status, created_at)
         SELECT r.id, 'bench suggestion', (r.sample_id % 7) + 2.0, 'auto', 'suggested',
             '2026-01-01T00:00:00Z'
         FROM reading r WHERE r.sample_id % 100 = 1 AND r.id % 100 = 50",
        [],
    )
    .expect("flags");
    tx.commit().expect("commit");
    start.elapsed()
}

/// Median and minimum of `runs` timings of `f`.
fn time(runs: usize, mut f: impl FnMut()) -> (Duration, Duration) {
    let mut all: Vec<Duration> = (0..runs)
        .map(|_| {
            let t = Instant::now();
            f();
            t.elapsed()
        })
        .collect();
    all.sort();
    (all[all.len() / 2], all[0])
}

fn ms(d: Duration) -> f64 {
    d.as_secs_f64() * 1e3
}

fn keys(s: &mut Session, script: &[Key]) {
    for key in script {
        s.press(&key.event());
    }
}

fn main() {
    // PW_BENCH_DB=FILE keeps the campaign there (built when missing) for repeated runs.
    let dir = tempfile::tempdir().expect("temp dir");
    let path = std::env::var_os("PW_BENCH_DB")
        .map_or_else(|| dir.path().join("bench.sqlite"), std::path::PathBuf::from);
    if path.exists() {
        println!("using {}", path.display());
    } else {
        println!(
            "building {} samples and {} readings ...",
            SITES * LAYERS_PER_SITE * SAMPLES_PER_LAYER,
            SITES * LAYERS_PER_SITE * SAMPLES_PER_LAYER * READINGS_PER_SAMPLE
        );
        let built = build(&path);
        println!("built in {:.1} s\n", built.as_secs_f64());
    }

    let (median, min) = time(7, || {
        let session = Session::open(&path, SessionOptions::scripted(100, 30)).expect("opens");
        let mut terminal = Terminal::new(TestBackend::new(100, 30)).expect("terminal");
        session.draw(&mut terminal).expect("draw");
    });
    println!(
        "start to first frame (open, load tree, draw 100x30): median {:.1} ms, min {:.1} ms (target < 300 ms)\n",
        ms(median),
        ms(min)
    );

    let enter = Key::plain(KeyCode::Enter);
    let down = Key::char('j');
    let tab = Key::plain(KeyCode::Tab);
    let panes: Vec<(&str, Vec<Key>)> = vec![
        ("tree + site summary (first screen)", vec![]),
        ("tree open + layer summary", vec![enter, down]),
        ("tree + curve + card + readings", vec![enter, down, down]),
        (
            "same, 95 % band on, kPa",
            vec![enter, down, down, Key::char('b'), Key::char('u')],
        ),
        ("fit card focused", vec![enter, down, down, tab, tab, tab]),
        (
            "tree filtered while typing",
            vec![Key::char('/'), Key::char('C'), Key::char('9')],
        ),
        ("depth view (10 layers, 100 curves)", vec![Key::char('2')]),
        ("review queue (100 suspects) + curve", vec![Key::char('3')]),
        ("help", vec![Key::char('?')]),
        ("logger series (1,000,000 records)", vec![Key::char('4')]),
        (
            "logger series zoomed in twice",
            vec![Key::char('4'), Key::char('+'), Key::char('+')],
        ),
    ];
    println!(
        "{:<40} {:>16} {:>16}",
        "frame render into TestBackend", "100x30 median", "200x60 median"
    );
    for (name, script) in &panes {
        let mut row = format!("{name:<40}");
        for (w, h) in [(100u16, 30u16), (200, 60)] {
            let mut s = Session::open(&path, SessionOptions::scripted(w, h)).expect("opens");
            keys(&mut s, script);
            let mut terminal = Terminal::new(TestBackend::new(w, h)).expect("terminal");
            let (median, _) = time(51, || s.draw(&mut terminal).expect("draw"));
            let _ = write!(row, " {:>13.3} ms", ms(median));
        }
        println!("{row}");
    }
    println!("(target < 10 ms a frame)\n");

    // What keys that load data cost (the runtime runs these loads on the UI thread).
    let mut s = Session::open(&path, SessionOptions::scripted(100, 30)).expect("opens");
    keys(&mut s, &[enter, down, down]);
    let mut toggle = false;
    let (select, _) = time(21, || {
        toggle = !toggle;
        s.press(
            &(if toggle {
                Key::char('j')
            } else {
                Key::char('k')
            })
            .event(),
        );
    });
    let (tree, _) = time(7, || {
        s.dispatch(Action::FlagChanged(Ok("bench".into())));
    });
    let (depth, _) = time(7, || keys(&mut s, &[Key::char('2')]));
    let (review, _) = time(7, || keys(&mut s, &[Key::char('3')]));
    // The series of the first site's logged depth (the tree cursor starts on that site).
    let mut s = Session::open(&path, SessionOptions::scripted(100, 30)).expect("opens");
    let (series, _) = time(5, || keys(&mut s, &[Key::char('1'), Key::char('4')]));
    let records = s.state.series.data.as_ref().map_or(0, |d| {
        d.suction.as_ref().map_or(0, |x| x.records) + d.water.as_ref().map_or(0, |x| x.records)
    });
    let mut zoom = false;
    let (pan, _) = time(7, || {
        zoom = !zoom;
        keys(
            &mut s,
            &[if zoom { Key::char('+') } else { Key::char('w') }],
        );
    });
    let mut s = Session::open(&path, SessionOptions::scripted(100, 30)).expect("opens");
    keys(&mut s, &[Key::char('/')]);
    let mut typed = 0;
    let (filter, _) = time(21, || {
        typed += 1;
        let key = if typed % 2 == 1 {
            Key::char('9')
        } else {
            Key::plain(KeyCode::Backspace)
        };
        s.press(&key.event());
    });
    println!("loads behind keys (median):");
    println!(
        "  select a sample (its 100 readings, fit, flags): {:.1} ms",
        ms(select)
    );
    println!(
        "  reload tree + sample after a flag or refit:     {:.1} ms",
        ms(tree)
    );
    println!(
        "  depth view of a site (100 fits decoded):        {:.1} ms",
        ms(depth)
    );
    println!(
        "  review queue:                                   {:.1} ms",
        ms(review)
    );
    println!(
        "  a filter keystroke over 10,000 samples:         {:.1} ms",
        ms(filter)
    );
    println!(
        "  logger series, whole year ({records} records):  {:.1} ms",
        ms(series)
    );
    println!(
        "  logger series, zoom to half / back to whole:    {:.1} ms",
        ms(pan)
    );

    // An interactive session: the same loads run on the load worker; the key returns at once
    // and the answer arrives later (keys are read meanwhile).
    let options = porewise::tui::runtime::SessionOptions {
        jobs: porewise::tui::runtime::Jobs::Background,
        ..SessionOptions::scripted(100, 30)
    };
    let mut returned = Vec::new();
    let mut answered = Vec::new();
    for _ in 0..3 {
        let mut s = Session::open(&path, options).expect("opens");
        let start = std::time::Instant::now();
        keys(&mut s, &[Key::char('4')]);
        returned.push(start.elapsed());
        assert!(s.wait_for_loads(Duration::from_secs(120)), "loads finish");
        answered.push(start.elapsed());
        assert!(s.state.series.data.is_some(), "a series arrived");
    }
    returned.sort();
    answered.sort();
    println!("interactive session, logger series behind the load worker (median):");
    println!(
        "  the key returns after:                          {:.2} ms",
        ms(returned[returned.len() / 2])
    );
    println!(
        "  the series arrives after:                       {:.1} ms",
        ms(answered[answered.len() / 2])
    );
}
