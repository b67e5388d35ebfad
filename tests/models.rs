//! Retention, conductivity and derived values against the reference tables, plus the
//! invariants of the models.
//!
//! Outside values come from `tests/data/reference/soil_reference_tables.json` (see the README
//! there): Carsel & Parrish (1988) parameters (from memory, high) with values computed
//! independently (mpmath, 50 digits), tables T1, T2, T3 and T9 of the project's reference notes.
#![allow(
    clippy::float_cmp,
    clippy::unreadable_literal,
    clippy::excessive_precision
)]

use std::sync::OnceLock;

use porewise::model::conductivity::{ConductivityModel, relative_conductivity};
use porewise::model::derived::{
    AirEntryConstruction, derive, inflection_vs_h, inflection_vs_ln_h, slope_vs_ln_h,
    suction_at_half_saturation, theta_at_kpa,
};
use porewise::model::retention::fredlund_xing::{H_DRY_CM, correction};
use porewise::model::retention::{ModelKind, RetentionCurve};
use porewise::model::units::CM_PER_KPA;
use serde_json::Value;

const REFERENCE: &str = include_str!("data/reference/soil_reference_tables.json");

fn reference() -> &'static Value {
    static PARSED: OnceLock<Value> = OnceLock::new();
    PARSED.get_or_init(|| serde_json::from_str(REFERENCE).expect("reference JSON parses"))
}

/// Relative difference check (1e-9 is what 10 printed significant digits support).
fn assert_rel(actual: f64, expected: f64, tol: f64, what: &str) {
    let scale = expected.abs().max(f64::MIN_POSITIVE);
    let rel = (actual - expected).abs() / scale;
    assert!(
        rel <= tol,
        "{what}: got {actual:e}, expected {expected:e} (relative difference {rel:e})"
    );
}

struct CarselClass {
    name: String,
    curve: RetentionCurve,
    ks_cm_per_day: f64,
}

/// Carsel & Parrish (1988) mean van Genuchten parameters per texture class (from memory, high).
fn carsel_parrish() -> Vec<CarselClass> {
    reference()["carsel_parrish_1988"]
        .as_array()
        .expect("table")
        .iter()
        .map(|row| {
            let f = |k: &str| row[k].as_f64().expect("number");
            CarselClass {
                name: row["class"].as_str().expect("class").to_string(),
                curve: RetentionCurve::new(
                    ModelKind::VanGenuchten,
                    vec![f("theta_r"), f("theta_s"), f("alpha_per_cm"), f("n")],
                )
                .expect("published parameters are within bounds"),
                ks_cm_per_day: f("ks_cm_per_day"),
            }
        })
        .collect()
}

/// The computed records of one reference model.
fn records(model: &str) -> impl Iterator<Item = &'static Value> {
    reference()["computed"]
        .as_array()
        .expect("records")
        .iter()
        .filter(move |r| r["model"] == model)
}

fn vg_records(class: &str, quantity: &str) -> Vec<(Option<f64>, f64)> {
    records("van_genuchten_mualem_m=1-1/n")
        .filter(|r| r["subject"] == class && r["quantity"] == quantity)
        .map(|r| (r["h_cm"].as_f64(), r["value"].as_f64().expect("value")))
        .collect()
}

fn single(class: &str, quantity: &str) -> f64 {
    let found = vg_records(class, quantity);
    assert_eq!(found.len(), 1, "{class} {quantity}");
    found[0].1
}

// ---------------------------------------------------------------------------------------------
// T1 and T2: van Genuchten theta(h) and Se(h), Carsel & Parrish (1988) parameters; values
// computed independently (soil-reference.md tables T1, T2).

#[test]
fn theta_matches_table_t1_for_every_texture_class() {
    let mut checked = 0;
    for class in carsel_parrish() {
        for (h, expected) in vg_records(&class.name, "theta") {
            let h = h.expect("suction");
            assert_rel(
                class.curve.theta(h),
                expected,
                1e-9,
                &format!("{} theta({h})", class.name),
            );
            checked += 1;
        }
    }
    assert_eq!(checked, 12 * 5);
}

#[test]
fn effective_saturation_matches_table_t2_for_every_texture_class() {
    let mut checked = 0;
    for class in carsel_parrish() {
        for (h, expected) in vg_records(&class.name, "se") {
            let h = h.expect("suction");
            assert_rel(
                class.curve.effective_saturation(h),
                expected,
                1e-9,
                &format!("{} Se({h})", class.name),
            );
            checked += 1;
        }
    }
    assert_eq!(checked, 12 * 5);
}

// ---------------------------------------------------------------------------------------------
// T3: derived quantities, van Genuchten-Mualem with L = 0.5, Carsel & Parrish (1988)
// parameters and Ks; values computed independently (soil-reference.md table T3).

#[test]
fn conductivity_and_capacity_at_100_cm_match_table_t3() {
    for class in carsel_parrish() {
        let p = class.curve.params();
        let name = &class.name;
        let kr = relative_conductivity(ModelKind::VanGenuchten, 100.0, p, 0.5).expect("Mualem");
        assert_rel(
            kr,
            single(name, "kr_mualem_h100"),
            1e-9,
            &format!("{name} Kr(100)"),
        );
        let k = porewise::model::conductivity::conductivity(
            ModelKind::VanGenuchten,
            100.0,
            p,
            class.ks_cm_per_day,
            0.5,
        )
        .expect("Mualem");
        assert_rel(
            k,
            single(name, "k_mualem_h100_cm_per_day"),
            1e-9,
            &format!("{name} K(100)"),
        );
        let c = class.curve.capacity(100.0).expect("smooth");
        assert_rel(
            c,
            single(name, "capacity_h100_per_cm"),
            1e-9,
            &format!("{name} C(100)"),
        );
    }
}

#[test]
fn inflection_points_and_dexter_slope_match_table_t3() {
    for class in carsel_parrish() {
        let name = &class.name;
        let ln = inflection_vs_ln_h(&class.curve).expect("van Genuchten has one");
        assert_rel(
            ln.suction_cm,
            single(name, "h_inflection_lnh_cm"),
            1e-9,
            &format!("{name} h_i ln h"),
        );
        assert_rel(
            ln.theta,
            single(name, "theta_inflection_lnh"),
            1e-9,
            &format!("{name} theta(h_i)"),
        );
        assert_rel(
            ln.effective_saturation,
            single(name, "se_inflection_lnh"),
            1e-9,
            &format!("{name} Se(h_i)"),
        );
        let s = slope_vs_ln_h(&class.curve, ln.suction_cm).expect("slope");
        assert_rel(
            s,
            single(name, "dexter_S"),
            1e-9,
            &format!("{name} Dexter S"),
        );
        let lin = inflection_vs_h(&class.curve).expect("van Genuchten has one");
        assert_rel(
            lin.suction_cm,
            single(name, "h_inflection_linear_h_cm"),
            1e-9,
            &format!("{name} h_i linear h"),
        );
        let half = suction_at_half_saturation(&class.curve).expect("exists");
        assert_rel(
            half,
            single(name, "h_at_se_half_cm"),
            1e-9,
            &format!("{name} h(Se=1/2)"),
        );
    }
}

#[test]
fn plant_available_water_matches_table_t3_both_ways() {
    for class in carsel_parrish() {
        let name = &class.name;
        let c = &class.curve;
        // 330 cm and 15000 cm, the rounded heads.
        assert_rel(
            c.theta(330.0) - c.theta(15000.0),
            single(name, "paw_theta330_minus_theta15000"),
            1e-9,
            &format!("{name} PAW 330-15000 cm"),
        );
        // 33 and 1500 kPa converted exactly, through the report values.
        let d = derive(c, 33.0, 1500.0);
        assert_rel(
            d.plant_available_water.expect("PAW"),
            single(name, "paw_33kpa_minus_1500kpa"),
            1e-9,
            &format!("{name} PAW 33-1500 kPa"),
        );
        assert_rel(
            d.theta_field_capacity.expect("FC"),
            single(name, "theta_at_33kpa"),
            1e-9,
            &format!("{name} theta(33 kPa)"),
        );
        assert_rel(
            d.theta_wilting_point.expect("PWP"),
            single(name, "theta_at_1500kpa"),
            1e-9,
            &format!("{name} theta(1500 kPa)"),
        );
        assert_rel(
            theta_at_kpa(c, 10.0).expect("theta") - d.theta_wilting_point.expect("PWP"),
            single(name, "paw_10kpa_minus_1500kpa"),
            1e-9,
            &format!("{name} PAW 10-1500 kPa"),
        );
        let ae = d.air_entry.expect("smooth model");
        assert_eq!(
            ae.construction,
            AirEntryConstruction::TangentAtLnHInflection
        );
        assert!(ae.suction_cm > 0.0 && ae.suction_cm < d.inflection_vs_ln_h.expect("i").suction_cm);
    }
}

// ---------------------------------------------------------------------------------------------
// T9: synthetic (unpublished) parameter sets, formula regression values computed independently
// (soil-reference.md table T9).

fn synthetic(model: &str, quantity: &str) -> Vec<(f64, f64)> {
    records(model)
        .filter(|r| r["quantity"] == quantity)
        .map(|r| {
            let h = r["h_cm"]
                .as_f64()
                .or_else(|| r["psi_kpa"].as_f64().map(|kpa| kpa * CM_PER_KPA))
                .expect("suction");
            (h, r["value"].as_f64().expect("value"))
        })
        .collect()
}

fn check_synthetic(model: &str, quantity: &str, f: impl Fn(f64) -> f64, tol: f64) {
    let rows = synthetic(model, quantity);
    assert!(rows.len() >= 5, "{model} {quantity}");
    for (h, expected) in rows {
        let what = format!("{model} {quantity} at {h} cm");
        if expected == 0.0 {
            assert!(f(h).abs() <= 1e-15, "{what}: {}", f(h));
        } else {
            assert_rel(f(h), expected, tol, &what);
        }
    }
}

#[test]
fn kosugi_matches_table_t9() {
    // theta_r 0.05, theta_s 0.45, h_m 100 cm, sigma 1.5, L = 0.5 (synthetic set).
    let c = RetentionCurve::new(ModelKind::Kosugi, vec![0.05, 0.45, 100.0, 1.5]).expect("valid");
    let m = "kosugi_1996";
    check_synthetic(m, "se", |h| c.effective_saturation(h), 1e-9);
    check_synthetic(m, "theta", |h| c.theta(h), 1e-9);
    check_synthetic(
        m,
        "kr_mualem",
        |h| relative_conductivity(ModelKind::Kosugi, h, c.params(), 0.5).expect("Kr"),
        1e-9,
    );
    assert_eq!(c.effective_saturation(100.0), 0.5);
}

#[test]
fn fredlund_xing_matches_table_t9_with_its_correction() {
    // theta_s 0.45, a 10 kPa, n 2, m 1, psi_r 1500 kPa (synthetic set), all converted to cm.
    let h_r = 1500.0 * CM_PER_KPA;
    let c = RetentionCurve::new(
        ModelKind::FredlundXing,
        vec![0.45, 10.0 * CM_PER_KPA, 2.0, 1.0, h_r],
    )
    .expect("valid");
    let m = "fredlund_xing_1994";
    check_synthetic(m, "theta", |h| c.theta(h), 1e-9);
    check_synthetic(m, "correction_C", |h| correction(h, h_r), 1e-9);
    // Uncorrected curve: theta / C(h), wherever C(h) > 0.
    for (h, expected) in synthetic(m, "theta_without_correction") {
        if h < H_DRY_CM * (1.0 - 1e-12) {
            assert_rel(
                c.theta(h) / correction(h, h_r),
                expected,
                1e-9,
                &format!("uncorrected at {h}"),
            );
        }
    }
    assert_eq!(c.theta(H_DRY_CM), 0.0);
}

#[test]
fn durner_matches_table_t9() {
    // theta_r 0.05, theta_s 0.5, w (0.4, 0.6), alpha (0.1, 0.005) 1/cm, n (3, 1.5) (synthetic set).
    let c = RetentionCurve::new(
        ModelKind::Durner,
        vec![0.05, 0.5, 0.4, 0.1, 3.0, 0.005, 1.5],
    )
    .expect("valid");
    let m = "durner_1994";
    check_synthetic(m, "se", |h| c.effective_saturation(h), 1e-9);
    check_synthetic(m, "theta", |h| c.theta(h), 1e-9);
    check_synthetic(
        m,
        "kr_mualem_priesack_durner_2006",
        |h| relative_conductivity(ModelKind::Durner, h, c.params(), 0.5).expect("Kr"),
        1e-9,
    );
}

#[test]
fn free_m_van_genuchten_matches_the_burdine_set_of_table_t9() {
    // theta_r 0.05, theta_s 0.45, alpha 0.02 1/cm, n 3, m = 1 - 2/n = 1/3 (synthetic set).
    let c = RetentionCurve::new(
        ModelKind::VanGenuchtenFreeM,
        vec![0.05, 0.45, 0.02, 3.0, 1.0 / 3.0],
    )
    .expect("valid");
    let m = "van_genuchten_burdine_free_m";
    check_synthetic(m, "se", |h| c.effective_saturation(h), 1e-9);
    check_synthetic(m, "theta", |h| c.theta(h), 1e-9);
    let ln_h = records(m)
        .find(|r| r["quantity"] == "h_inflection_lnh_cm")
        .and_then(|r| r["value"].as_f64())
        .expect("record");
    let lin_h = records(m)
        .find(|r| r["quantity"] == "h_inflection_linear_h_cm")
        .and_then(|r| r["value"].as_f64())
        .expect("record");
    assert_rel(
        inflection_vs_ln_h(&c).expect("i").suction_cm,
        ln_h,
        1e-9,
        "ln-h inflection",
    );
    assert_rel(
        inflection_vs_h(&c).expect("i").suction_cm,
        lin_h,
        1e-9,
        "linear-h inflection",
    );
    // Mualem's conductivity with free m goes through the incomplete beta function.
    assert_eq!(
        ConductivityModel::for_model(ModelKind::VanGenuchtenFreeM),
        Some(ConductivityModel::MualemVanGenuchtenFreeM)
    );
}

// ---------------------------------------------------------------------------------------------
// Invariants (soil-reference.md section 7, all derived).

/// One realistic parameter set per model.
fn sample_curves() -> Vec<RetentionCurve> {
    let sets: [(ModelKind, &[f64]); 7] = [
        (ModelKind::VanGenuchten, &[0.078, 0.43, 0.036, 1.56]),
        (ModelKind::VanGenuchtenFreeM, &[0.05, 0.45, 0.02, 3.0, 0.4]),
        (ModelKind::BrooksCorey, &[0.02, 0.437, 7.26, 0.592]),
        (ModelKind::Kosugi, &[0.05, 0.45, 100.0, 1.5]),
        (ModelKind::FredlundXing, &[0.45, 101.97, 2.0, 1.0, 15295.7]),
        (ModelKind::Durner, &[0.05, 0.5, 0.4, 0.1, 3.0, 0.005, 1.5]),
        (ModelKind::Campbell, &[0.395, 12.1, 4.05]),
    ];
    sets.iter()
        .map(|(k, p)| RetentionCurve::new(*k, p.to_vec()).expect("valid"))
        .collect()
}

fn log_grid(lo: f64, hi: f64, per_decade: usize) -> Vec<f64> {
    let decades = (hi / lo).log10();
    let steps = (decades * per_decade as f64).round() as usize;
    (0..=steps)
        .map(|i| lo * 10f64.powf(decades * i as f64 / steps as f64))
        .collect()
}

#[test]
fn saturation_is_bounded_and_decreasing_and_theta_starts_at_theta_s() {
    for c in sample_curves() {
        let (_, theta_s) = c.theta_range();
        assert_eq!(c.theta(0.0), theta_s, "{}", c.kind());
        assert_eq!(c.effective_saturation(0.0), 1.0, "{}", c.kind());
        let mut last = 1.0;
        for h in log_grid(1e-3, 1e8, 20) {
            let se = c.effective_saturation(h);
            assert!((0.0..=1.0).contains(&se), "{} Se({h}) = {se}", c.kind());
            assert!(se <= last, "{} not decreasing at {h}", c.kind());
            last = se;
        }
    }
}

#[test]
fn theta_tends_to_theta_r_at_high_suction() {
    for c in sample_curves() {
        let (theta_r, theta_s) = c.theta_range();
        let far = c.theta(1e15);
        match c.kind() {
            ModelKind::VanGenuchten
            | ModelKind::VanGenuchtenFreeM
            | ModelKind::BrooksCorey
            | ModelKind::Kosugi
            | ModelKind::Durner => {
                assert!(
                    (far - theta_r) / (theta_s - theta_r) < 1e-4,
                    "{} {far}",
                    c.kind()
                );
            }
            ModelKind::FredlundXing => assert_eq!(far, 0.0),
            ModelKind::Campbell => assert!(far < 1e-3 * theta_s),
        }
    }
}

#[test]
fn inverse_returns_the_suction() {
    for c in sample_curves() {
        for h in log_grid(0.5, 1e6, 4) {
            let theta = c.theta(h);
            let se = c.effective_saturation(h);
            if !(1e-12..1.0).contains(&se) {
                continue;
            }
            let back = c.suction_at(theta).expect("reachable");
            assert_rel(back, h, 1e-7, &format!("{} h(theta({h}))", c.kind()));
        }
        let (_, theta_s) = c.theta_range();
        assert_eq!(c.suction_at(theta_s), Some(0.0), "{}", c.kind());
    }
}

#[test]
fn halfway_suction_gives_half_saturation() {
    for c in sample_curves() {
        let h = suction_at_half_saturation(&c).expect("exists");
        assert!(
            (c.effective_saturation(h) - 0.5).abs() < 1e-9,
            "{}",
            c.kind()
        );
    }
}

#[test]
fn piecewise_models_are_continuous_at_their_break() {
    for c in sample_curves() {
        let h_break = match c.kind() {
            ModelKind::BrooksCorey => c.param("h_b_cm"),
            ModelKind::Campbell => c.param("h_e_cm"),
            _ => None,
        };
        let Some(hb) = h_break else { continue };
        let (_, theta_s) = c.theta_range();
        assert_eq!(c.theta(hb), theta_s);
        assert!((c.theta(hb * (1.0 + 1e-12)) - theta_s).abs() < 1e-11);
        assert_eq!(c.capacity(hb), None, "undefined at the break");
        assert_eq!(c.capacity(hb * 0.999), Some(0.0));
        assert!(c.capacity(hb * 1.001).expect("defined") > 0.0);
    }
}

#[test]
fn capacity_integrates_to_the_water_released() {
    // Integral of C(h) dh from 0 to infinity = theta_s - theta_r (derived), by the trapezoid
    // rule in ln h: integral of h C(h) d ln h.
    for c in sample_curves() {
        let (theta_r, theta_s) = c.theta_range();
        let grid = log_grid(1e-6, 1e16, 400);
        let mut total = 0.0;
        for w in grid.windows(2) {
            let f = |h: f64| h * c.capacity(h).unwrap_or(0.0);
            total += 0.5 * (f(w[0]) + f(w[1])) * (w[1].ln() - w[0].ln());
        }
        let released = theta_s - theta_r;
        let tail = c.theta(1e16) - theta_r + (theta_s - c.theta(1e-6));
        assert!(
            (total + tail - released).abs() < 2e-3 * released,
            "{}: {total} vs {released}",
            c.kind()
        );
    }
}

#[test]
fn relative_conductivity_is_one_when_saturated_and_decreasing() {
    for c in sample_curves() {
        if ConductivityModel::for_model(c.kind()).is_none() {
            assert_eq!(relative_conductivity(c.kind(), 10.0, c.params(), 0.5), None);
            continue;
        }
        assert_eq!(
            relative_conductivity(c.kind(), 0.0, c.params(), 0.5),
            Some(1.0)
        );
        let mut last = 1.0;
        for h in log_grid(1e-2, 1e7, 10) {
            let kr = relative_conductivity(c.kind(), h, c.params(), 0.5).expect("Kr");
            assert!(
                (0.0..=1.0).contains(&kr) && kr <= last,
                "{} Kr({h}) = {kr}",
                c.kind()
            );
            last = kr;
        }
    }
}

#[test]
fn burdine_brooks_corey_is_a_power_law() {
    // Kr = Se^(3 + 2/lambda) = (h_b/h)^(2 + 3 lambda) (Burdine 1953 with Brooks & Corey 1964).
    let p = [0.02, 0.437, 7.26, 0.592];
    for h in [10.0, 100.0, 1000.0, 15000.0] {
        let kr = relative_conductivity(ModelKind::BrooksCorey, h, &p, 0.5).expect("Kr");
        assert_rel(
            kr,
            (7.26_f64 / h).powf(2.0 + 3.0 * 0.592),
            1e-12,
            "power law",
        );
        let se = ModelKind::BrooksCorey
            .retention()
            .effective_saturation(h, &p);
        assert_rel(kr, se.powf(3.0 + 2.0 / 0.592), 1e-12, "Se form");
    }
}

#[test]
fn mualem_van_genuchten_h_form_equals_the_se_form() {
    // Se^L [1 - (1 - Se^(1/m))^m]^2, evaluated the plain way where it is accurate.
    let p = [0.078, 0.43, 0.036, 1.56];
    let m = 1.0 - 1.0 / 1.56;
    for h in [1.0, 10.0, 100.0, 1000.0] {
        let se: f64 = ModelKind::VanGenuchten
            .retention()
            .effective_saturation(h, &p);
        let plain = se.sqrt() * (1.0 - (1.0 - se.powf(1.0 / m)).powf(m)).powi(2);
        let kr = relative_conductivity(ModelKind::VanGenuchten, h, &p, 0.5).expect("Kr");
        assert_rel(kr, plain, 1e-9, &format!("Kr({h})"));
    }
}

#[test]
fn pore_connectivity_changes_only_mualem_forms() {
    let vg = [0.078, 0.43, 0.036, 1.56];
    let a = relative_conductivity(ModelKind::VanGenuchten, 100.0, &vg, 0.5).expect("Kr");
    let b = relative_conductivity(ModelKind::VanGenuchten, 100.0, &vg, -1.0).expect("Kr");
    let se = ModelKind::VanGenuchten
        .retention()
        .effective_saturation(100.0, &vg);
    assert_rel(b / a, se.powf(-1.5), 1e-12, "Se^(L1 - L2)");
    let bc = [0.02, 0.437, 7.26, 0.592];
    assert_eq!(
        relative_conductivity(ModelKind::BrooksCorey, 100.0, &bc, 0.5),
        relative_conductivity(ModelKind::BrooksCorey, 100.0, &bc, 2.0)
    );
}

#[test]
fn durner_with_one_mode_is_van_genuchten() {
    // w = (1, 0) reduces to unimodal van Genuchten for retention and Kr (derived). w1 = 1 is
    // outside the fitting bounds, so the model functions are called directly.
    let vg = [0.078, 0.43, 0.036, 1.56];
    let durner = [0.078, 0.43, 1.0, 0.036, 1.56, 0.001, 1.2];
    for h in log_grid(0.1, 1e6, 3) {
        let a = ModelKind::VanGenuchten.curve().value(h, &vg);
        let b = ModelKind::Durner.curve().value(h, &durner);
        assert_rel(b, a, 1e-14, &format!("theta({h})"));
        let ka = relative_conductivity(ModelKind::VanGenuchten, h, &vg, 0.5).expect("Kr");
        let kb = relative_conductivity(ModelKind::Durner, h, &durner, 0.5).expect("Kr");
        assert_rel(kb, ka, 1e-12, &format!("Kr({h})"));
    }
}

#[test]
fn durner_modes_are_put_in_canonical_order() {
    let mut p = vec![0.05, 0.5, 0.6, 0.005, 1.5, 0.1, 3.0];
    let before: Vec<f64> = [1.0, 100.0, 1000.0]
        .iter()
        .map(|&h| ModelKind::Durner.curve().value(h, &p))
        .collect();
    ModelKind::Durner.canonicalize(&mut p);
    assert_eq!(p[3], 0.1, "mode 1 is the large-pore mode");
    assert!((p[2] - 0.4).abs() < 1e-15);
    for (h, b) in [1.0, 100.0, 1000.0].iter().zip(before) {
        assert_rel(
            ModelKind::Durner.curve().value(*h, &p),
            b,
            1e-14,
            "same curve",
        );
    }
}

#[test]
fn report_values_never_hold_nan() {
    for c in sample_curves() {
        let d = derive(&c, 33.0, 1500.0);
        // Debug prints every f64 as written, NaN and inf included (JSON would turn them into null).
        let shown = format!("{d:?}");
        for bad in ["NaN", "(inf)", "(-inf)", ": inf", ": -inf"] {
            assert!(!shown.contains(bad), "{shown}");
        }
        assert!(d.plant_available_water.expect("PAW") > 0.0, "{}", c.kind());
        assert!(d.air_entry.is_some(), "{}", c.kind());
    }
}

#[test]
fn starting_guesses_are_within_bounds_and_near_the_truth() {
    let suctions = [0.0, 10.0, 30.0, 60.0, 100.0, 330.0, 1000.0, 3000.0, 15000.0];
    for c in sample_curves() {
        let model = c.kind().curve();
        let theta: Vec<f64> = suctions.iter().map(|&h| c.theta(h)).collect();
        let guesses = model.initial_guesses(&suctions, &theta);
        assert!((2..=4).contains(&guesses.len()), "{}", c.kind());
        for g in &guesses {
            c.kind()
                .check_params(g)
                .unwrap_or_else(|e| panic!("{}: {e} in {g:?}", c.kind()));
        }
        // The best guess already follows the model's own data to within 0.03 m3/m3 RMS.
        let rms = (suctions
            .iter()
            .zip(&theta)
            .map(|(&h, &t)| (model.value(h, &guesses[0]) - t).powi(2))
            .sum::<f64>()
            / suctions.len() as f64)
            .sqrt();
        assert!(rms < 0.03, "{}: RMS {rms} for {:?}", c.kind(), guesses[0]);
    }
}

#[test]
fn van_genuchten_guesses_follow_every_texture_class() {
    // Noise-free readings at common lab suctions from the Carsel & Parrish (1988) classes: the
    // best starting guess is within 0.012 m3/m3 RMS before any fitting, and ranked first.
    let suctions = [0.0, 10.0, 30.0, 60.0, 100.0, 330.0, 1000.0, 3000.0, 15000.0];
    let model = ModelKind::VanGenuchten.curve();
    for class in carsel_parrish() {
        let theta: Vec<f64> = suctions.iter().map(|&h| class.curve.theta(h)).collect();
        let guesses = model.initial_guesses(&suctions, &theta);
        let rms = |g: &[f64]| {
            (suctions
                .iter()
                .zip(&theta)
                .map(|(&h, &t)| (model.value(h, g) - t).powi(2))
                .sum::<f64>()
                / suctions.len() as f64)
                .sqrt()
        };
        let first = rms(&guesses[0]);
        assert!(
            first < 0.012,
            "{}: RMS {first} for {:?}",
            class.name,
            guesses[0]
        );
        assert!(
            guesses.iter().all(|g| rms(g) >= first),
            "{}: best first",
            class.name
        );
    }
}

#[test]
fn guesses_survive_degenerate_data() {
    let cases: [(&[f64], &[f64]); 4] = [
        (&[], &[]),
        (&[100.0], &[0.3]),
        (&[10.0, 100.0, 1000.0], &[0.3, 0.3, 0.3]),
        (&[0.0, 0.0, 0.0], &[0.4, 0.3, 0.2]),
    ];
    for kind in ModelKind::ALL {
        for (h, t) in cases {
            let guesses = kind.curve().initial_guesses(h, t);
            assert!(!guesses.is_empty(), "{kind}");
            for g in &guesses {
                kind.check_params(g)
                    .unwrap_or_else(|e| panic!("{kind}: {e} in {g:?}"));
            }
        }
    }
}

/// Regression: odd readings (water content below zero, all equal, NaN) must give guesses or
/// none, never a panic, for every model.
#[test]
fn guesses_never_panic_on_odd_readings() {
    let x = [0.0, 10.0, 100.0, 1000.0, 15000.0];
    for y in [
        [0.4, 0.3, -0.05, -0.1, -0.2],
        [0.3, 0.3, 0.3, 0.3, 0.3],
        [0.1, 0.2, 0.3, 0.4, 0.5],
        [f64::NAN, 0.3, 0.2, 0.1, 0.05],
        [0.0, 0.0, 0.0, 0.0, 0.0],
    ] {
        for kind in porewise::model::retention::ModelKind::ALL {
            let _ = kind.curve().initial_guesses(&x, &y);
        }
    }
    // Seeded noise around a drying curve that dips below zero at the dry end.
    let mut state = 0x2545_f491_4f6c_dd1d_u64;
    let mut next = || {
        state ^= state << 13;
        state ^= state >> 7;
        state ^= state << 17;
        (state >> 11) as f64 / (1u64 << 53) as f64
    };
    for _ in 0..2000 {
        let y: Vec<f64> = x
            .iter()
            .map(|h| 0.4 / (1.0 + h / 50.0) - 0.1 + 0.2 * next())
            .collect();
        for kind in porewise::model::retention::ModelKind::ALL {
            let _ = kind.curve().initial_guesses(&x, &y);
        }
    }
}

// ---------------------------------------------------------------------------------------------
// Relative precision far from saturation.

#[test]
fn effective_saturation_keeps_its_relative_precision_far_from_saturation() {
    // mpmath 1.3.0, 50 digits (tests/data/high_precision.py), from the published formulas
    // with these (invented) parameters passed as the same doubles. Computed from theta as
    // (theta - theta_r) / (theta_s - theta_r), the first ones would be 0 or noise.
    let cases: [(ModelKind, &[f64], f64, f64); 10] = [
        (
            ModelKind::VanGenuchten,
            &[0.05, 0.4, 0.05, 5.0],
            1e6,
            1.5999999999999958008e-19,
        ),
        (
            ModelKind::VanGenuchten,
            &[0.05, 0.4, 0.02, 1.5],
            1e5,
            0.022360596442285678556,
        ),
        (
            ModelKind::VanGenuchtenFreeM,
            &[0.05, 0.4, 0.02, 3.0, 2.0],
            1e5,
            1.5624999996093748049e-20,
        ),
        (
            ModelKind::BrooksCorey,
            &[0.05, 0.4, 10.0, 3.0],
            1e7,
            1.0e-18,
        ),
        (
            ModelKind::Kosugi,
            &[0.05, 0.4, 100.0, 0.8],
            1e6,
            5.6779792968410468465e-31,
        ),
        (
            ModelKind::Kosugi,
            &[0.05, 0.4, 100.0, 1.5],
            1e5,
            2.060643395971720144e-6,
        ),
        (
            ModelKind::FredlundXing,
            &[0.4, 100.0, 3.0, 2.0, 1500.0],
            1e7,
            1.8544115809663184651e-6,
        ),
        (
            ModelKind::FredlundXing,
            &[0.4, 100.0, 3.0, 2.0, 1500.0],
            H_DRY_CM - 1.0,
            9.2827950121522074367e-12,
        ),
        (
            ModelKind::Durner,
            &[0.05, 0.4, 0.4, 0.1, 3.0, 0.005, 4.0],
            1e6,
            4.479999999999986262e-11,
        ),
        (ModelKind::Campbell, &[0.4, 5.0, 0.5], 1e7, 2.5e-13),
    ];
    for (kind, p, h, want) in cases {
        let curve = RetentionCurve::new(kind, p.to_vec()).expect("valid parameters");
        assert_rel(
            curve.effective_saturation(h),
            want,
            1e-13,
            &format!("{kind} Se({h})"),
        );
    }
}

// ---------------------------------------------------------------------------------------------
// Mualem's integral, evaluated numerically: an independent check of the closed forms.

/// int_lo^hi f(s) ds by tanh-sinh (double exponential) quadrature (Takahasi & Mori 1974),
/// which copes with integrable singularities at the ends; `f` gets s and its distance to the
/// upper end (hi - s), computed without cancellation near it.
fn tanh_sinh(lo: f64, hi: f64, f: impl Fn(f64, f64) -> f64) -> f64 {
    use std::f64::consts::FRAC_PI_2;
    let half = 0.5 * (hi - lo);
    let mut previous = f64::NAN;
    let mut sum = 0.0;
    // The trapezoidal rule in t with step 1, then halved: each level adds the new nodes only.
    for level in 0..12 {
        let step = 0.5_f64.powi(level);
        let (mut k, stride) = if level == 0 { (0, 1) } else { (1, 2) };
        loop {
            let t = f64::from(k) * step;
            // x = tanh(u) >= 0; near = 1 - x without cancellation; weight dx/dt.
            let u = FRAC_PI_2 * t.sinh();
            let e = (-2.0 * u).exp();
            let near = 2.0 * e / (1.0 + e);
            let w = FRAC_PI_2 * t.cosh() / u.cosh().powi(2);
            if near == 0.0 || w * half < 1e-300 {
                break;
            }
            // The node at +x (close to hi) and, for t > 0, its mirror at -x (close to lo).
            let mut node = |to_lo: f64, to_hi: f64| {
                let v = f(lo + to_lo, to_hi);
                if v.is_finite() {
                    sum += w * v;
                }
            };
            node(half * (2.0 - near), half * near);
            if k != 0 {
                node(half * near, half * (2.0 - near));
            }
            k += stride;
        }
        let estimate = sum * step * half;
        if (estimate - previous).abs() <= 1e-15 * estimate.abs() {
            return estimate;
        }
        previous = estimate;
    }
    previous
}

/// Kr of Mualem (1976) for van Genuchten's curve with m free, by quadrature of
/// Se^L [int_0^Se dS / h(S) / int_0^1 dS / h(S)]^2 with 1/h(S) proportional to
/// (S^(-1/m) - 1)^(-1/n) (alpha cancels).
fn mualem_by_quadrature(h: f64, alpha: f64, n: f64, m: f64, l: f64) -> f64 {
    let ln_b = (alpha * h).powf(n).ln_1p();
    let se = (-m * ln_b).exp();
    let one_minus_se = -(-m * ln_b).exp_m1();
    // S^(-1/m) - 1 from ln S, taken from 1 - S near 1 where that is the exact one.
    let inv_h = |s: f64, one_minus: f64| {
        let ln_s = if one_minus < 0.5 {
            (-one_minus).ln_1p()
        } else {
            s.ln()
        };
        (-ln_s / m).exp_m1().powf(-1.0 / n)
    };
    let num = tanh_sinh(0.0, se, |s, to_hi| inv_h(s, one_minus_se + to_hi));
    let den = tanh_sinh(0.0, 1.0, inv_h);
    se.powf(l) * (num / den).powi(2)
}

#[test]
fn mualem_free_m_closed_form_matches_high_precision_values() {
    // mpmath 1.3.0, 50 digits, by quadrature of Mualem's integral in Se
    // (tests/data/high_precision.py). The first is also the value the review gave
    // (0.00852468914138).
    let cases = [
        (100.0, [0.02, 1.5, 0.3], 0.0085246891413815262158),
        (1.0, [0.02, 1.5, 0.3], 0.74071994270221618678),
        (1e4, [0.02, 1.5, 0.3], 7.4319803675642231084e-9),
        (50.0, [0.05, 3.0, 2.0], 3.5162118734305423497e-8),
    ];
    for (h, [alpha, n, m], want) in cases {
        let p = [0.05, 0.4, alpha, n, m];
        let kr = ConductivityModel::MualemVanGenuchtenFreeM
            .relative(h, &p, 0.5)
            .expect("Kr");
        assert_rel(
            kr,
            want,
            1e-12,
            &format!("Kr({h}) alpha {alpha} n {n} m {m}"),
        );
    }
    let kr = ConductivityModel::MualemVanGenuchtenFreeM
        .relative(100.0, &[0.05, 0.4, 0.02, 1.5, 0.3], 0.5)
        .expect("Kr");
    assert!((kr - 0.00852468914138).abs() < 1e-14, "{kr}");
}

#[test]
fn mualem_free_m_closed_form_matches_numerical_integration() {
    let mut worst: f64 = 0.0;
    for &(alpha, n, m) in &[
        (0.02, 1.5, 0.3),
        (0.02, 1.2, 0.9),
        (0.1, 2.5, 0.4),
        (0.005, 4.0, 1.5),
        (0.05, 1.1, 0.05),
        (0.01, 8.0, 3.0),
    ] {
        for h in [0.5, 10.0, 100.0, 1000.0, 15000.0] {
            for l in [0.5, -1.0] {
                let p = [0.05, 0.4, alpha, n, m];
                let kr = ConductivityModel::MualemVanGenuchtenFreeM
                    .relative(h, &p, l)
                    .expect("Kr");
                let q = mualem_by_quadrature(h, alpha, n, m, l);
                let rel = (kr - q).abs() / q;
                worst = worst.max(rel);
                assert!(
                    rel < 1e-10,
                    "alpha {alpha} n {n} m {m} h {h} L {l}: closed form {kr:e}, quadrature {q:e}"
                );
            }
        }
    }
    println!("largest relative difference from the quadrature: {worst:e}");
}

#[test]
fn mualem_free_m_with_m_one_minus_one_over_n_is_van_genuchten() {
    for (alpha, n) in [(0.036, 1.56), (0.145, 2.68), (0.008, 1.09)] {
        let m = 1.0 - 1.0 / n;
        for h in [1.0, 30.0, 330.0, 15000.0] {
            let free = ConductivityModel::MualemVanGenuchtenFreeM
                .relative(h, &[0.05, 0.4, alpha, n, m], 0.5)
                .expect("Kr");
            let restricted =
                relative_conductivity(ModelKind::VanGenuchten, h, &[0.05, 0.4, alpha, n], 0.5)
                    .expect("Kr");
            assert_rel(
                free,
                restricted,
                1e-12,
                &format!("alpha {alpha} n {n} h {h}"),
            );
        }
    }
}

#[test]
fn mualem_brooks_corey_matches_numerical_integration() {
    // 1/h(S) = S^(1/lambda) / h_b for Brooks-Corey; Mualem's ratio of integrals by quadrature.
    let (h_b, lambda) = (7.26, 0.592);
    let inv_h = |s: f64| s.powf(1.0 / lambda) / h_b;
    let den = tanh_sinh(0.0, 1.0, |s, _| inv_h(s));
    for h in [10.0, 100.0, 1000.0, 15000.0] {
        let se = (h_b / h).powf(lambda);
        let num = tanh_sinh(0.0, se, |s, _| inv_h(s));
        let want = se.sqrt() * (num / den).powi(2);
        let kr = ConductivityModel::MualemBrooksCorey
            .relative(h, &[0.02, 0.437, h_b, lambda], 0.5)
            .expect("Kr");
        assert_rel(kr, want, 1e-12, &format!("Kr({h})"));
    }
}

#[test]
fn mualem_free_m_is_bounded_and_decreasing_over_the_parameter_space() {
    for alpha in [1e-4, 0.02, 2.0] {
        for n in [1.001, 1.05, 1.5, 3.0, 14.0] {
            for m in [0.001, 0.1, 1.0, 9.0] {
                let p = [0.05, 0.4, alpha, n, m];
                let mut last = 1.0;
                for h in log_grid(1e-6, 1.1e7, 8) {
                    let kr = ConductivityModel::MualemVanGenuchtenFreeM
                        .relative(h, &p, 0.5)
                        .unwrap_or_else(|| panic!("no Kr at {h} for {p:?}"));
                    assert!(
                        (0.0..=1.0).contains(&kr) && kr <= last * (1.0 + 1e-12),
                        "Kr({h}) = {kr} after {last} for {p:?}"
                    );
                    last = kr;
                }
            }
        }
    }
}
