//! Pointwise 95 % confidence band of a fitted curve, by the delta method.
//!
//! Var(theta(h)) ~ g' Cov g, with g the gradient of theta(h) with respect to the parameters in
//! the report's covariance (the free ones off their bounds) and Cov = s^2 (J'WJ)^-1. The band is
//! theta(h) -+ t(0.975, n - k) sqrt(g' Cov g): an interval for the curve itself (the mean
//! response), not for a new reading.

use super::delta::Delta;
use super::report::FitReport;

/// The band at one suction: lower and upper water content, m3/m3.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct BandPoint {
    /// Suction head, cm.
    pub h_cm: f64,
    /// Fitted water content.
    pub theta: f64,
    /// Lower edge of the 95 % band.
    pub lower: f64,
    /// Upper edge of the 95 % band.
    pub upper: f64,
}

/// The 95 % band of `report`'s curve at each suction in `h_cm` (cm, >= 0).
///
/// `None` when the report has no covariance (no degrees of freedom, a singular Jacobian) or
/// names a model this program does not know. Suctions where the curve or its gradient is not
/// finite are left out, so no NaN is ever returned.
pub fn confidence_band(report: &FitReport, h_cm: &[f64]) -> Option<Vec<BandPoint>> {
    // The same delta method as every derived value (`super::delta`), so the band at a
    // suction is the interval of theta there.
    let delta = Delta::of(report)?;
    let model = delta.kind().curve();
    let p = delta.center();
    let mut grad = vec![0.0; p.len()];
    let mut out = Vec::with_capacity(h_cm.len());
    for &h in h_cm {
        if !(h >= 0.0 && h.is_finite()) {
            continue;
        }
        let theta = model.value_and_gradient(h, p, &mut grad);
        let Some(var) = delta.variance(&grad) else {
            continue;
        };
        let half = delta.t() * var.sqrt();
        if theta.is_finite() && half.is_finite() {
            out.push(BandPoint {
                h_cm: h,
                theta,
                lower: theta - half,
                upper: theta + half,
            });
        }
    }
    Some(out)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::fit::stats::t975;
    use crate::fit::{FitOptions, Readings, fit_model};
    use crate::model::retention::ModelKind;

    /// Readings of a van Genuchten curve with a fixed, deterministic wiggle.
    fn readings() -> (Vec<f64>, Vec<f64>) {
        let h = vec![0.0, 10.0, 30.0, 60.0, 100.0, 330.0, 1000.0, 3000.0, 15000.0];
        let curve = crate::model::retention::RetentionCurve::new(
            ModelKind::VanGenuchten,
            vec![0.06, 0.41, 0.03, 1.6],
        )
        .expect("valid");
        let wiggle = [
            0.004, -0.003, 0.005, -0.006, 0.002, 0.004, -0.005, 0.003, -0.002,
        ];
        let theta = h
            .iter()
            .zip(wiggle)
            .map(|(&h, w)| curve.theta(h) + w)
            .collect();
        (h, theta)
    }

    #[test]
    fn band_at_a_reading_matches_its_leverage() {
        // For an unweighted fit Var(fitted_i) = s^2 h_ii (the hat-matrix diagonal), so the
        // half-width at a reading must equal t s sqrt(h_ii): two routes through the same
        // covariance that share no code beyond the report.
        let (h, theta) = readings();
        let report = fit_model(
            ModelKind::VanGenuchten,
            &Readings::new(&h, &theta),
            &FitOptions::new(),
        )
        .expect("fits");
        let band = confidence_band(&report, &h).expect("has a covariance");
        assert_eq!(band.len(), h.len());
        let s = report.residual_sd.expect("dof > 0");
        let t = t975(report.n_points - report.n_free_params).expect("t");
        for (point, reading) in band.iter().zip(&report.readings) {
            let leverage = reading.leverage.expect("leverage");
            let expected = t * s * leverage.sqrt();
            let half = (point.upper - point.lower) / 2.0;
            assert!(
                (half - expected).abs() < 1e-9 + 1e-6 * expected,
                "h={} half={half} expected={expected}",
                point.h_cm
            );
            assert!((point.theta - reading.fitted).abs() < 1e-12);
            assert!(point.lower <= point.theta && point.theta <= point.upper);
        }
    }

    #[test]
    fn no_covariance_no_band() {
        let (h, theta) = readings();
        let mut report = fit_model(
            ModelKind::VanGenuchten,
            &Readings::new(&h, &theta),
            &FitOptions::new(),
        )
        .expect("fits");
        report.covariance = None;
        assert!(confidence_band(&report, &h).is_none());
        let bad = confidence_band(
            &FitReport {
                covariance: fit_model(
                    ModelKind::VanGenuchten,
                    &Readings::new(&h, &theta),
                    &FitOptions::new(),
                )
                .expect("fits")
                .covariance,
                model: "nonsense".into(),
                ..report
            },
            &h,
        );
        assert!(bad.is_none());
    }
}
