//! Fits in the campaign: stored fits equal the engine's, history and the current fit, stale
//! fits, failed refits, the `auto` ranking, and the available-water profile.

#![allow(clippy::float_cmp)]

mod common;

use std::fmt::Write as _;

use common::porewise;
use porewise::analysis::{ModelChoice, fit_campaign, fit_input, profiles};
use porewise::fit::FitOptions;
use porewise::import::{ImportKind, ImportOptions, Source, import_sources};
use porewise::model::retention::ModelKind;
use porewise::model::units::CM_PER_KPA;
use porewise::store::Campaign;
use porewise::store::fits::{self, FitState, Selection, StaleReason};

/// Typical lab suctions, cm (common practice: hanging column, sandbox, pressure plates).
const SUCTIONS_CM: [f64; 9] = [0.0, 10.0, 30.0, 60.0, 100.0, 330.0, 1000.0, 3000.0, 15000.0];

/// van Genuchten class means, Carsel & Parrish (1988) (theta_r, theta_s, alpha 1/cm, n).
const LOAM: [f64; 4] = [0.078, 0.43, 0.036, 1.56];
const SANDY_LOAM: [f64; 4] = [0.065, 0.41, 0.075, 1.89];

/// A lab file with noise-free van Genuchten readings for each (site, top, bottom, sample, params).
fn lab_file(samples: &[(&str, f64, f64, &str, [f64; 4])], suctions: &[f64]) -> Source {
    let vg = ModelKind::VanGenuchten.curve();
    let mut text = String::from("site,top_cm,bottom_cm,sample,method,suction_cm,theta\n");
    for (site, top, bottom, code, p) in samples {
        for h in suctions {
            let _ = writeln!(
                text,
                "{site},{top},{bottom},{code},plate,{h},{:.17}",
                vg.value(*h, p)
            );
        }
    }
    Source {
        name: "lab.csv".to_string(),
        bytes: text.into_bytes(),
    }
}

fn campaign_with(samples: &[(&str, f64, f64, &str, [f64; 4])]) -> Campaign {
    let mut c = Campaign::in_memory("test", 33.0, 1500.0).expect("campaign");
    import_sources(
        &mut c,
        ImportKind::Lab,
        &[lab_file(samples, &SUCTIONS_CM)],
        ImportOptions::default(),
    )
    .expect("import");
    c
}

fn fit(c: &mut Campaign, selection: &Selection, choice: ModelChoice) -> usize {
    fit_campaign(c, selection, choice, &FitOptions::new(), &|_, _| {})
        .expect("fit")
        .failed
        .len()
}

fn state_of(c: &Campaign, code: &str) -> FitState {
    let conn = c.connection();
    let samples = fits::samples(
        conn,
        &Selection {
            samples: vec![code.to_string()],
            ..Selection::default()
        },
    )
    .expect("samples");
    fits::summaries(conn, &samples).expect("summaries")[&samples[0].id]
        .state
        .clone()
}

fn sample_id(c: &Campaign, code: &str) -> i64 {
    porewise::store::samples::find(c.connection(), code)
        .expect("query")
        .expect("sample")
        .id
}

#[test]
fn a_stored_fit_reads_back_equal_to_the_engine_result() {
    let mut c = campaign_with(&[("S", 0.0, 20.0, "S-a", LOAM)]);
    let vg = ModelChoice::One(ModelKind::VanGenuchten);
    assert_eq!(fit(&mut c, &Selection::all(), vg), 0);
    let conn = c.connection();
    let input = &fits::inputs(conn, &Selection::all()).expect("inputs")[0];
    let engine = fit_input(input, vg, &FitOptions::new());
    let stored = fits::current(conn, input.sample.id)
        .expect("query")
        .expect("current fit");
    assert_eq!(stored.report.as_ref(), engine.report.as_ref());
    assert_eq!(stored.reading_ids, input.reading_ids);
    assert_eq!(stored.fingerprint, input.fingerprint);
    assert_eq!(stored.n_points, SUCTIONS_CM.len());
    assert!(stored.is_current);
    let report = stored.report.expect("report");
    // The per-reading diagnostics line up with the stored reading ids.
    assert_eq!(report.readings.len(), stored.reading_ids.len());
    // Noise-free loam readings: the fit recovers the Carsel & Parrish (1988) parameters.
    for (p, want) in report.parameters.iter().zip(LOAM) {
        assert!(
            (p.value - want).abs() <= 1e-6 * want,
            "{} = {}",
            p.name,
            p.value
        );
    }
}

#[test]
fn a_new_fit_becomes_current_and_the_old_one_stays_as_history() {
    let mut c = campaign_with(&[("S", 0.0, 20.0, "S-a", LOAM)]);
    fit(
        &mut c,
        &Selection::all(),
        ModelChoice::One(ModelKind::VanGenuchten),
    );
    fit(
        &mut c,
        &Selection::all(),
        ModelChoice::One(ModelKind::BrooksCorey),
    );
    let history = fits::history(c.connection(), sample_id(&c, "S-a")).expect("history");
    assert_eq!(history.len(), 2);
    assert_eq!(history[0].model, "van-genuchten");
    assert!(!history[0].is_current);
    assert_eq!(history[1].model, "brooks-corey");
    assert!(history[1].is_current);
    assert_eq!(state_of(&c, "S-a"), FitState::Current);
}

#[test]
fn a_fit_goes_stale_when_its_readings_change_or_are_flagged() {
    let mut c = campaign_with(&[("S", 0.0, 20.0, "S-a", LOAM), ("S", 0.0, 20.0, "S-b", LOAM)]);
    fit(&mut c, &Selection::all(), ModelChoice::Auto);
    assert_eq!(state_of(&c, "S-a"), FitState::Current);
    let conn = c.connection();
    // A changed value.
    conn.execute(
        "UPDATE reading SET theta = theta + 0.01 WHERE id =
             (SELECT min(r.id) FROM reading r JOIN sample m ON m.id = r.sample_id WHERE m.code = 'S-a')",
        [],
    )
    .expect("update");
    assert_eq!(
        state_of(&c, "S-a"),
        FitState::Stale(vec![StaleReason::ReadingsChanged])
    );
    // An accepted flag excludes a reading of the other sample.
    conn.execute(
        "INSERT INTO flag (reading_id, reason, origin, status, created_at, decided_at)
         SELECT max(r.id), 'test', 'manual', 'accepted', '2026-12-02T00:00:00Z', '2026-12-02T00:00:00Z'
         FROM reading r JOIN sample m ON m.id = r.sample_id WHERE m.code = 'S-b'",
        [],
    )
    .expect("flag");
    assert!(state_of(&c, "S-b").is_stale());
    // Refitting uses one reading fewer and is current again.
    fit(
        &mut c,
        &Selection {
            samples: vec!["S-b".into()],
            ..Selection::default()
        },
        ModelChoice::Auto,
    );
    assert_eq!(state_of(&c, "S-b"), FitState::Current);
    let current = fits::current(c.connection(), sample_id(&c, "S-b"))
        .expect("query")
        .expect("fit");
    assert_eq!(current.n_points, SUCTIONS_CM.len() - 1);
}

#[test]
fn a_failed_refit_keeps_the_previous_fit_current_but_stale() {
    let mut c = campaign_with(&[("S", 0.0, 20.0, "S-a", LOAM)]);
    fit(
        &mut c,
        &Selection::all(),
        ModelChoice::One(ModelKind::VanGenuchten),
    );
    // Durner has seven free parameters: nine readings are enough to try; fixing nothing and
    // removing readings makes it impossible.
    c.connection()
        .execute(
            "DELETE FROM reading WHERE h_cm > 1000 AND sample_id = (SELECT id FROM sample WHERE code = 'S-a')",
            [],
        )
        .expect("delete");
    let failed = fit(
        &mut c,
        &Selection::all(),
        ModelChoice::One(ModelKind::Durner),
    );
    assert_eq!(failed, 1);
    let history = fits::history(c.connection(), sample_id(&c, "S-a")).expect("history");
    assert_eq!(history.len(), 2);
    assert_eq!(history[1].status, fits::FitStatus::Failed);
    assert!(
        history[1]
            .message
            .as_deref()
            .is_some_and(|m| m.contains("readings"))
    );
    assert!(history[0].is_current, "the previous fit stays current");
    match state_of(&c, "S-a") {
        FitState::Stale(reasons) => {
            assert!(reasons.contains(&StaleReason::ReadingsChanged));
            assert!(
                reasons
                    .iter()
                    .any(|r| matches!(r, StaleReason::RefitFailed(_)))
            );
        }
        other => panic!("expected stale, got {other:?}"),
    }
}

#[test]
fn auto_keeps_the_ranking_in_aicc_order_and_makes_the_best_current() {
    let mut c = campaign_with(&[("S", 0.0, 20.0, "S-a", SANDY_LOAM)]);
    fit(&mut c, &Selection::all(), ModelChoice::Auto);
    let stored = fits::current(c.connection(), sample_id(&c, "S-a"))
        .expect("query")
        .expect("fit");
    assert_eq!(stored.requested.as_deref(), Some("auto"));
    let ranking = stored.ranking.expect("ranking kept");
    assert!(ranking.ranked.len() >= 3, "{ranking:?}");
    assert_eq!(stored.model, ranking.ranked[0].model);
    let aicc: Vec<f64> = ranking
        .ranked
        .iter()
        .map(|r| r.aicc.expect("aicc"))
        .collect();
    assert!(aicc.windows(2).all(|w| w[0] <= w[1]), "{aicc:?}");
    let weights: f64 = ranking.ranked.iter().map(|r| r.akaike_weight).sum();
    assert!((weights - 1.0).abs() < 1e-12);
    // Durner (7 parameters) needs 9 readings for AICc: with 9 it is tried, and every model
    // either ranks or says why not.
    assert_eq!(
        ranking.ranked.len() + ranking.skipped.len(),
        ModelKind::ALL.len()
    );
}

#[test]
fn the_profile_sums_available_water_over_layers_cut_at_the_root_zone() {
    // Loam 0-30 cm and sandy loam 30-80 cm, noise-free Carsel & Parrish (1988) curves.
    let mut c = campaign_with(&[
        ("P", 0.0, 30.0, "P-top", LOAM),
        ("P", 30.0, 80.0, "P-sub", SANDY_LOAM),
    ]);
    fit(
        &mut c,
        &Selection::all(),
        ModelChoice::One(ModelKind::VanGenuchten),
    );
    let settings = c.settings().expect("settings");
    let profile = &profiles(c.connection(), &settings, 50.0, None).expect("profiles")[0];
    // Hand computation: theta(33 kPa) - theta(1500 kPa) from soil-reference table T3
    // (Carsel & Parrish 1988 parameters; values computed independently): loam 0.07617436281,
    // sandy loam 0.01882474632 m3/m3. The root zone of 50 cm takes all 30 cm of the loam and
    // 20 cm of the sandy loam: 0.07617436281 * 30 cm * 10 mm/cm + 0.01882474632 * 20 * 10
    // = 22.852308843 + 3.764949264 = 26.617258107 mm.
    let expected = 26.617_258_107;
    assert!(
        (profile.total_mm - expected).abs() < 1e-4 * expected,
        "{}",
        profile.total_mm
    );
    assert_eq!(profile.layers[1].depth_in_zone_cm, 20.0);
    assert_eq!(profile.covered_cm, 50.0);
    assert_eq!(profile.uncovered_cm(), 0.0);
    // Deeper than the profile: 80 cm are covered out of 120.
    let deep = &profiles(c.connection(), &settings, 120.0, None).expect("profiles")[0];
    assert_eq!(deep.covered_cm, 80.0);
    assert_eq!(deep.uncovered_cm(), 40.0);
}

#[test]
fn field_capacity_changes_apply_without_a_refit() {
    let mut c = campaign_with(&[("S", 0.0, 20.0, "S-a", LOAM)]);
    fit(
        &mut c,
        &Selection::all(),
        ModelChoice::One(ModelKind::VanGenuchten),
    );
    porewise::store::campaign::set_suctions(c.connection(), 10.0, 1500.0).expect("set");
    let settings = c.settings().expect("settings");
    let rows = porewise::analysis::sample_fits(c.connection(), &settings, &Selection::all())
        .expect("rows");
    let fc = rows[0]
        .derived
        .as_ref()
        .and_then(|d| d.values.theta_field_capacity)
        .expect("fc");
    let want = ModelKind::VanGenuchten
        .curve()
        .value(10.0 * CM_PER_KPA, &LOAM);
    assert!((fc - want).abs() < 1e-6, "{fc} vs {want}");
    assert_eq!(rows[0].state, FitState::Current);
}

#[test]
fn the_fit_command_records_fits_and_lists_them_with_their_state() {
    let s = common::Scratch::new();
    s.import_ok("lab", &["valid/lab_kpa.csv"]);
    porewise()
        .arg("fit")
        .arg(&s.db)
        .args(["--sample", "LV-A1"])
        .assert()
        .success()
        .stdout(predicates::str::contains("fitted 1 sample"));
    let listing = s.list(&["fits", "--format", "csv"]);
    let mut reader = csv::Reader::from_reader(listing.as_bytes());
    let headers = reader.headers().expect("header").clone();
    let col = |name: &str| headers.iter().position(|h| h == name).expect(name);
    let rows: Vec<csv::StringRecord> = reader.records().map(|r| r.expect("row")).collect();
    let state_of = |sample: &str| {
        rows.iter()
            .find(|r| &r[col("sample")] == sample)
            .map(|r| r[col("state")].to_string())
    };
    assert_eq!(state_of("LV-A1").as_deref(), Some("current"), "{listing}");
    assert_eq!(state_of("LV-B1").as_deref(), Some("none"), "{listing}");
    // Every sample: LV-B1 has three readings, too few for any model: exit 3, listed.
    porewise()
        .arg("fit")
        .arg(&s.db)
        .assert()
        .code(3)
        .stderr(predicates::str::contains("sample LV-B1: not fitted"));
    // Unknown codes are a user error.
    porewise()
        .arg("fit")
        .arg(&s.db)
        .args(["--site", "NOPE"])
        .assert()
        .code(1)
        .stderr(predicates::str::contains("no site \"NOPE\""));
    // A model that needs more readings than the sample has: the old fit stays, stale.
    porewise()
        .arg("fit")
        .arg(&s.db)
        .args(["--sample", "LV-A1", "--model", "durner"])
        .assert()
        .code(3)
        .stderr(predicates::str::contains("not fitted"));
    let listing = s.list(&["fits", "--sample", "LV-A1"]);
    assert!(listing.contains("stale (a later refit failed"), "{listing}");
    let history = s.list(&["fits", "--sample", "LV-A1", "--all"]);
    // Header, the two auto fits (alone, then with every sample) and the failed attempt.
    assert_eq!(history.lines().count(), 4, "{history}");
    assert!(history.contains("failed"), "{history}");
}

#[test]
fn set_changes_the_field_capacity_and_refuses_nonsense() {
    let s = common::Scratch::new();
    porewise()
        .arg("set")
        .arg(&s.db)
        .args(["--fc-kpa", "10"])
        .assert()
        .success()
        .stdout(predicates::str::contains("field capacity 10 kPa (was 33)"));
    porewise()
        .arg("set")
        .arg(&s.db)
        .args(["--fc-kpa", "2000"])
        .assert()
        .code(1);
    porewise().arg("set").arg(&s.db).assert().code(1);
    let c = Campaign::open(&s.db).expect("open");
    assert_eq!(c.settings().expect("settings").fc_kpa, 10.0);
}
