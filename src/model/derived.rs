//! Values a report derives from a fitted curve: field capacity, wilting point, plant-available
//! water, an air-entry estimate, the inflection points, Dexter's S and the halfway suction.
//!
//! Every value that does not apply to a model (no inflection for the piecewise models, ...) or
//! that cannot be computed is `None`; no NaN leaves this module.

use serde::{Deserialize, Serialize};

pub mod gradient;

use super::retention::van_genuchten::mualem_m;
use super::retention::{ModelKind, RetentionCurve, finite};
use super::units::CM_PER_KPA;

/// Field capacity suction by default, kPa (common practice; 10 kPa is common for sandy soils).
pub const DEFAULT_FIELD_CAPACITY_KPA: f64 = 33.0;
/// Permanent wilting point suction by default, kPa (common practice, pF 4.2).
pub const DEFAULT_WILTING_POINT_KPA: f64 = 1500.0;

/// How an air-entry suction was obtained.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum AirEntryConstruction {
    /// Brooks-Corey's bubbling suction h_b, a parameter of the model.
    BubblingSuction,
    /// Campbell's air-entry suction h_e, a parameter of the model.
    AirEntryParameter,
    /// Smooth models: the tangent to theta(ln h) at its inflection point meets theta = theta_s
    /// (the usual graphical construction, common practice).
    TangentAtLnHInflection,
}

impl AirEntryConstruction {
    /// A short description for reports.
    pub fn describe(self) -> &'static str {
        match self {
            AirEntryConstruction::BubblingSuction => "Brooks-Corey bubbling suction h_b",
            AirEntryConstruction::AirEntryParameter => "Campbell air-entry suction h_e",
            AirEntryConstruction::TangentAtLnHInflection => {
                "tangent at the inflection of theta vs ln h, intersected with theta_s"
            }
        }
    }
}

/// An air-entry suction and how it was obtained.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct AirEntry {
    /// The air-entry suction, cm.
    pub suction_cm: f64,
    /// The construction used.
    pub construction: AirEntryConstruction,
}

/// A point of the curve: suction, water content and effective saturation there.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct CurvePoint {
    /// Suction, cm.
    pub suction_cm: f64,
    /// Water content, m3/m3.
    pub theta: f64,
    /// Effective saturation.
    pub effective_saturation: f64,
}

/// The values derived from one curve.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct DerivedValues {
    /// Field-capacity suction used, kPa.
    pub field_capacity_kpa: f64,
    /// Wilting-point suction used, kPa.
    pub wilting_point_kpa: f64,
    /// theta at field capacity.
    pub theta_field_capacity: Option<f64>,
    /// theta at the wilting point.
    pub theta_wilting_point: Option<f64>,
    /// theta(FC) - theta(PWP), m3/m3.
    pub plant_available_water: Option<f64>,
    /// Air-entry suction with its construction.
    pub air_entry: Option<AirEntry>,
    /// Inflection of theta against ln h (Dexter 2004): the steepest point on a log axis.
    pub inflection_vs_ln_h: Option<CurvePoint>,
    /// Inflection of theta against h on a linear axis: where C(h) peaks.
    pub inflection_vs_h: Option<CurvePoint>,
    /// Dexter's S = d theta / d ln h at the ln-h inflection (negative: theta falls as h rises).
    pub dexter_slope: Option<f64>,
    /// Suction where Se = 1/2, cm.
    pub suction_at_half_saturation_cm: Option<f64>,
}

/// Water content at a suction given in kPa.
pub fn theta_at_kpa(curve: &RetentionCurve, suction_kpa: f64) -> Option<f64> {
    let h = suction_kpa * CM_PER_KPA;
    (h >= 0.0 && h.is_finite())
        .then(|| curve.theta(h))
        .and_then(finite)
}

/// The gradient of available water theta(FC) - theta(PWP) with respect to every parameter of
/// the curve (model order): d theta / d p at field capacity minus at the wilting point (the
/// model's analytic derivatives; suctions in kPa). What the delta-method variance of available
/// water, g' Cov g, needs. `None` when a suction is invalid or a derivative is not finite.
pub fn available_water_gradient(
    curve: &RetentionCurve,
    field_capacity_kpa: f64,
    wilting_point_kpa: f64,
) -> Option<Vec<f64>> {
    let (fc, pwp) = (
        field_capacity_kpa * CM_PER_KPA,
        wilting_point_kpa * CM_PER_KPA,
    );
    if !(fc >= 0.0 && fc.is_finite() && pwp >= 0.0 && pwp.is_finite()) {
        return None;
    }
    gradient::available_water_gradient(curve.kind(), curve.params(), fc, pwp)
}

/// Derive the report values of a curve with the given field-capacity and wilting-point
/// suctions (kPa; [`DEFAULT_FIELD_CAPACITY_KPA`] and [`DEFAULT_WILTING_POINT_KPA`] usually).
pub fn derive(
    curve: &RetentionCurve,
    field_capacity_kpa: f64,
    wilting_point_kpa: f64,
) -> DerivedValues {
    let theta_fc = theta_at_kpa(curve, field_capacity_kpa);
    let theta_pwp = theta_at_kpa(curve, wilting_point_kpa);
    let paw = theta_fc
        .zip(theta_pwp)
        .and_then(|(fc, pwp)| finite(fc - pwp));
    let inflection_ln = inflection_vs_ln_h(curve);
    let dexter = inflection_ln.and_then(|pt| slope_vs_ln_h(curve, pt.suction_cm));
    DerivedValues {
        field_capacity_kpa,
        wilting_point_kpa,
        theta_field_capacity: theta_fc,
        theta_wilting_point: theta_pwp,
        plant_available_water: paw,
        air_entry: air_entry(curve, inflection_ln, dexter),
        inflection_vs_ln_h: inflection_ln,
        inflection_vs_h: inflection_vs_h(curve),
        dexter_slope: dexter,
        suction_at_half_saturation_cm: suction_at_half_saturation(curve),
    }
}

/// The air-entry estimate of a curve alone (as [`derive`] gives it): h_b, h_e, or the
/// tangent construction at the ln-h inflection for the smooth models.
pub fn air_entry_estimate(curve: &RetentionCurve) -> Option<AirEntry> {
    let inflection = inflection_vs_ln_h(curve);
    let slope = inflection.and_then(|pt| slope_vs_ln_h(curve, pt.suction_cm));
    air_entry(curve, inflection, slope)
}

/// d theta / d ln h = -h C(h) at suction h.
pub fn slope_vs_ln_h(curve: &RetentionCurve, h_cm: f64) -> Option<f64> {
    curve.capacity(h_cm).and_then(|c| finite(-h_cm * c))
}

/// The suction where Se = 1/2.
pub fn suction_at_half_saturation(curve: &RetentionCurve) -> Option<f64> {
    let (theta_r, theta_s) = curve.theta_range();
    curve.suction_at(theta_r + 0.5 * (theta_s - theta_r))
}

fn point(curve: &RetentionCurve, h: Option<f64>) -> Option<CurvePoint> {
    let h = h.filter(|h| h.is_finite() && *h > 0.0)?;
    Some(CurvePoint {
        suction_cm: h,
        theta: finite(curve.theta(h))?,
        effective_saturation: finite(curve.effective_saturation(h))?,
    })
}

/// The inflection of theta against ln h (Dexter 2004 definition).
///
/// Closed forms: van Genuchten alpha h = (1/m)^(1/n); Kosugi h = h_m. Fredlund-Xing and Durner:
/// the steepest point of theta(ln h), found numerically (for Durner the steeper of its modes).
/// `None` for Brooks-Corey and Campbell, whose slope on a log axis is largest at the break.
pub fn inflection_vs_ln_h(curve: &RetentionCurve) -> Option<CurvePoint> {
    let p = curve.params();
    let h = match curve.kind() {
        ModelKind::VanGenuchten => vg_inflection_ln(p[2], p[3], mualem_m(p[3])),
        ModelKind::VanGenuchtenFreeM => vg_inflection_ln(p[2], p[3], p[4]),
        ModelKind::Kosugi => Some(p[2]),
        ModelKind::FredlundXing | ModelKind::Durner => {
            argmax_over_ln_h(|h| curve.capacity(h).map_or(0.0, |c| h * c))
        }
        ModelKind::BrooksCorey | ModelKind::Campbell => None,
    };
    point(curve, h)
}

/// The inflection of theta against h on a linear axis (where C(h) is largest).
///
/// Closed forms: van Genuchten (alpha h)^n = (n - 1)/(m n + 1) (= m for m = 1 - 1/n); Kosugi
/// h = h_m exp(-sigma^2). Fredlund-Xing and Durner numerically; `None` when C(h) is largest at
/// h -> 0 (no interior inflection) and for the piecewise models.
pub fn inflection_vs_h(curve: &RetentionCurve) -> Option<CurvePoint> {
    let p = curve.params();
    let h = match curve.kind() {
        ModelKind::VanGenuchten => vg_inflection_linear(p[2], p[3], mualem_m(p[3])),
        ModelKind::VanGenuchtenFreeM => vg_inflection_linear(p[2], p[3], p[4]),
        ModelKind::Kosugi => Some(p[2] * (-p[3] * p[3]).exp()),
        ModelKind::FredlundXing | ModelKind::Durner => {
            argmax_over_ln_h(|h| curve.capacity(h).unwrap_or(0.0))
        }
        ModelKind::BrooksCorey | ModelKind::Campbell => None,
    };
    point(curve, h)
}

fn vg_inflection_ln(alpha: f64, n: f64, m: f64) -> Option<f64> {
    finite((-m.ln() / n).exp() / alpha)
}

fn vg_inflection_linear(alpha: f64, n: f64, m: f64) -> Option<f64> {
    if n <= 1.0 {
        return None;
    }
    finite((((n - 1.0) / (m * n + 1.0)).ln() / n).exp() / alpha)
}

/// Air-entry estimate: h_b for Brooks-Corey, h_e for Campbell; for the smooth models the
/// suction where the tangent at the ln-h inflection reaches theta_s:
/// h_ae = h_i exp(-(theta_s - theta_i) / |S|).
fn air_entry(
    curve: &RetentionCurve,
    inflection: Option<CurvePoint>,
    slope: Option<f64>,
) -> Option<AirEntry> {
    let p = curve.params();
    let (suction_cm, construction) = match curve.kind() {
        ModelKind::BrooksCorey => (p[2], AirEntryConstruction::BubblingSuction),
        ModelKind::Campbell => (p[1], AirEntryConstruction::AirEntryParameter),
        _ => {
            let (pt, s) = (inflection?, slope?);
            if s >= 0.0 {
                return None;
            }
            let (_, theta_s) = curve.theta_range();
            let h = pt.suction_cm * ((theta_s - pt.theta) / s).exp();
            (h, AirEntryConstruction::TangentAtLnHInflection)
        }
    };
    finite(suction_cm).map(|suction_cm| AirEntry {
        suction_cm,
        construction,
    })
}

/// Smallest and largest suction of the numerical searches, cm.
const SEARCH_MIN_CM: f64 = 1e-4;
const SEARCH_MAX_CM: f64 = 1e10;
/// Grid points per e-fold of suction before the golden-section refinement.
const GRID_PER_UNIT_LN: f64 = 16.0;

/// The suction maximizing `f` over ln h: a grid, then golden-section search around the best
/// grid point. `None` when the maximum sits at an end of the range or `f` is flat zero.
fn argmax_over_ln_h(f: impl Fn(f64) -> f64) -> Option<f64> {
    let (lo, hi) = (SEARCH_MIN_CM.ln(), SEARCH_MAX_CM.ln());
    let steps = ((hi - lo) * GRID_PER_UNIT_LN).ceil() as usize;
    let step = (hi - lo) / steps as f64;
    let g = |s: f64| f(s.exp());
    let (mut best_i, mut best) = (0, f64::NEG_INFINITY);
    for i in 0..=steps {
        let v = g(lo + step * i as f64);
        if v > best {
            best = v;
            best_i = i;
        }
    }
    if best_i == 0 || best_i == steps || best <= 0.0 || !best.is_finite() {
        return None;
    }
    let (a, b) = (
        lo + step * (best_i - 1) as f64,
        lo + step * (best_i + 1) as f64,
    );
    let (x, _) = crate::model::golden::golden_minimum(|x| -g(x), a, b, 1e-13, 100);
    finite(x.exp())
}

#[cfg(test)]
#[allow(clippy::float_cmp)]
mod tests {
    use super::*;

    fn curve(kind: ModelKind, p: &[f64]) -> RetentionCurve {
        RetentionCurve::new(kind, p.to_vec()).expect("valid parameters")
    }

    #[test]
    fn piecewise_models_use_their_parameter_as_air_entry() {
        let bc = derive(
            &curve(ModelKind::BrooksCorey, &[0.05, 0.4, 20.0, 0.5]),
            33.0,
            1500.0,
        );
        assert_eq!(
            bc.air_entry,
            Some(AirEntry {
                suction_cm: 20.0,
                construction: AirEntryConstruction::BubblingSuction
            })
        );
        assert_eq!(bc.inflection_vs_ln_h, None);
        assert_eq!(bc.dexter_slope, None);
        let half = bc.suction_at_half_saturation_cm.expect("exists");
        assert!(
            (half / (20.0 * 4.0) - 1.0).abs() < 1e-12,
            "h_b 2^(1/lambda): {half}"
        );
    }

    #[test]
    fn numerical_inflection_agrees_with_the_closed_form() {
        // A Durner curve with one mode weighted to almost nothing is nearly van Genuchten.
        let vg = curve(ModelKind::VanGenuchten, &[0.05, 0.4, 0.02, 1.8]);
        let closed = inflection_vs_ln_h(&vg).expect("vg").suction_cm;
        let numeric = argmax_over_ln_h(|h| vg.capacity(h).map_or(0.0, |c| h * c)).expect("max");
        assert!(
            (numeric / closed - 1.0).abs() < 1e-6,
            "{numeric} vs {closed}"
        );
        let closed_lin = inflection_vs_h(&vg).expect("vg").suction_cm;
        let numeric_lin = argmax_over_ln_h(|h| vg.capacity(h).unwrap_or(0.0)).expect("max");
        assert!((numeric_lin / closed_lin - 1.0).abs() < 1e-6);
    }

    #[test]
    fn tangent_air_entry_lies_below_the_inflection() {
        let d = derive(
            &curve(ModelKind::Kosugi, &[0.05, 0.45, 100.0, 1.5]),
            33.0,
            1500.0,
        );
        let ae = d.air_entry.expect("smooth model");
        assert_eq!(
            ae.construction,
            AirEntryConstruction::TangentAtLnHInflection
        );
        // Kosugi: h_m exp(-sigma sqrt(2 pi) / 2), derived from the tangent construction.
        let expected = 100.0 * (-1.5 * (2.0 * std::f64::consts::PI).sqrt() / 2.0).exp();
        assert!((ae.suction_cm / expected - 1.0).abs() < 1e-12, "{ae:?}");
    }

    #[test]
    fn serializes_without_nan() {
        let d = derive(&curve(ModelKind::Campbell, &[0.4, 20.0, 5.0]), 33.0, 1500.0);
        let json = serde_json::to_string(&d).expect("serializes");
        assert!(!json.contains("NaN"), "{json}");
        assert!(json.contains("\"inflection_vs_ln_h\":null"), "{json}");
        let back: DerivedValues = serde_json::from_str(&json).expect("round trip");
        assert_eq!(back.air_entry, d.air_entry);
        assert_eq!(back.inflection_vs_ln_h, None);
        let paw = back.plant_available_water.expect("present");
        assert!((paw - d.plant_available_water.expect("present")).abs() < 1e-15);
    }
    #[test]
    fn available_water_gradient_matches_central_differences() {
        // Each model at a typical loam-like point: the analytic gradient of theta(FC) -
        // theta(PWP) against central differences of the available water itself.
        let points: [(ModelKind, &[f64]); 7] = [
            (ModelKind::VanGenuchten, &[0.07, 0.42, 0.03, 1.5]),
            (ModelKind::VanGenuchtenFreeM, &[0.07, 0.42, 0.03, 1.6, 0.5]),
            (ModelKind::BrooksCorey, &[0.05, 0.4, 20.0, 0.5]),
            (ModelKind::Kosugi, &[0.05, 0.45, 300.0, 1.5]),
            (ModelKind::FredlundXing, &[0.42, 30.0, 1.8, 0.9, 3000.0]),
            (ModelKind::Durner, &[0.05, 0.43, 0.4, 0.1, 2.5, 0.005, 1.6]),
            (ModelKind::Campbell, &[0.4, 20.0, 5.0]),
        ];
        for (kind, p) in points {
            let c = curve(kind, p);
            let g = available_water_gradient(&c, 33.0, 1500.0).expect("finite");
            assert_eq!(g.len(), p.len());
            let aw = |q: &[f64]| {
                derive(&curve(kind, q), 33.0, 1500.0)
                    .plant_available_water
                    .expect("finite")
            };
            for k in 0..p.len() {
                let step = 1e-6 * p[k].abs().max(1e-3);
                let (mut up, mut down) = (p.to_vec(), p.to_vec());
                up[k] += step;
                down[k] -= step;
                let numeric = (aw(&up) - aw(&down)) / (2.0 * step);
                assert!(
                    (g[k] - numeric).abs() <= 1e-6 * numeric.abs().max(1e-3),
                    "{kind} parameter {k}: analytic {} numeric {numeric}",
                    g[k]
                );
            }
        }
        let c = curve(ModelKind::Campbell, &[0.4, 20.0, 5.0]);
        assert!(available_water_gradient(&c, f64::NAN, 1500.0).is_none());
    }
}
