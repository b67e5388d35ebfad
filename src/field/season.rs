//! A seeded, invented field season for tests, benchmarks and demonstrations: a layer with a
//! known retention curve, wetting after rain events and drying between them, logged by a
//! tensiometer and a water-content sensor with noise.
//!
//! The soil follows its curve exactly (no hysteresis), so every pair of the season lies on
//! the known curve up to the sensor noise, and the branch of every record is known.

use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, Normal};

use crate::model::domain::Branch;
use crate::model::retention::RetentionCurve;

/// What to generate.
#[derive(Debug, Clone, PartialEq)]
pub struct SeasonSpec {
    /// Seed of the random generator: the same spec gives the same season.
    pub seed: u64,
    /// First record, seconds since 1970-01-01 UTC.
    pub start: i64,
    /// Length of the season, days.
    pub days: u32,
    /// Logging interval, seconds.
    pub interval_s: i64,
    /// The soil's retention curve.
    pub curve: RetentionCurve,
    /// Standard deviation of the water-content sensor, m3/m3.
    pub theta_noise: f64,
    /// Relative standard deviation of the tensiometer.
    pub suction_noise_rel: f64,
    /// Absolute standard deviation of the tensiometer, cm.
    pub suction_noise_cm: f64,
    /// Days between rain events (uniform in this range).
    pub rain_gap_days: (f64, f64),
    /// Suction right after a rain, cm (uniform in this range).
    pub wet_h_cm: (f64, f64),
    /// Records a rain takes to wet the soil (uniform in this range, inclusive).
    pub wetting_records: (usize, usize),
    /// Growth of ln(h) per day while drying.
    pub drying_per_day: f64,
    /// The driest the soil gets, cm.
    pub max_h_cm: f64,
}

/// One record of the season: the true state and what the sensors logged.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SeasonRecord {
    /// Seconds since 1970-01-01 UTC.
    pub time: i64,
    /// True suction head, cm.
    pub h_cm: f64,
    /// True water content, m3/m3.
    pub theta: f64,
    /// Tensiometer value, cm (noise added, never below 0).
    pub h_logged: f64,
    /// Water-content sensor value, m3/m3 (noise added, within 0-1).
    pub theta_logged: f64,
    /// Wetting while a rain soaks in, drying otherwise.
    pub branch: Branch,
}

/// Generate the season.
///
/// # Panics
/// Never for a spec with positive noise figures; a negative standard deviation falls back to
/// no noise.
pub fn generate(spec: &SeasonSpec) -> Vec<SeasonRecord> {
    let mut rng = ChaCha8Rng::seed_from_u64(spec.seed);
    let unit = Normal::new(0.0, 1.0).unwrap_or_else(|_| unreachable!());
    let count = (i64::from(spec.days) * 86_400 / spec.interval_s.max(1)) as usize;
    let step_days = spec.interval_s as f64 / 86_400.0;
    let (gap_lo, gap_hi) = spec.rain_gap_days;
    let mut next_rain = rng.random_range(gap_lo..=gap_hi.max(gap_lo));
    let mut h = rng.random_range(spec.wet_h_cm.0..=spec.wet_h_cm.1);
    // A rain under way: the records left and the suction it ends at.
    let mut wetting: Option<(usize, f64)> = None;
    let mut out = Vec::with_capacity(count);
    for i in 0..count {
        let day = i as f64 * step_days;
        let branch = if let Some((left, target)) = wetting {
            // Geometric fall of h to the target over the remaining records.
            h *= (target / h).powf(1.0 / left as f64);
            wetting = (left > 1).then_some((left - 1, target));
            Branch::Wetting
        } else if day >= next_rain {
            let target = rng
                .random_range(spec.wet_h_cm.0..=spec.wet_h_cm.1)
                .min(h * 0.5);
            let (lo, hi) = spec.wetting_records;
            let left = rng.random_range(lo.max(1)..=hi.max(lo).max(1));
            h *= (target / h).powf(1.0 / left as f64);
            wetting = (left > 1).then_some((left - 1, target));
            next_rain = day + rng.random_range(gap_lo..=gap_hi.max(gap_lo));
            Branch::Wetting
        } else {
            h = (h * (spec.drying_per_day * step_days).exp()).min(spec.max_h_cm);
            Branch::Drying
        };
        let theta = spec.curve.theta(h);
        let e_h: f64 = unit.sample(&mut rng);
        let e_t: f64 = unit.sample(&mut rng);
        let h_logged = (h * (1.0 + spec.suction_noise_rel.max(0.0) * e_h)
            + spec.suction_noise_cm.max(0.0) * unit.sample(&mut rng))
        .max(0.0);
        let theta_logged = (theta + spec.theta_noise.max(0.0) * e_t).clamp(0.0, 1.0);
        out.push(SeasonRecord {
            time: spec.start + i as i64 * spec.interval_s,
            h_cm: h,
            theta,
            h_logged,
            theta_logged,
            branch,
        });
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::retention::ModelKind;

    fn spec() -> SeasonSpec {
        SeasonSpec {
            seed: 7,
            start: 1_777_593_600,
            days: 60,
            interval_s: 900,
            curve: RetentionCurve::new(ModelKind::VanGenuchten, vec![0.06, 0.41, 0.04, 1.6])
                .expect("valid"),
            theta_noise: 0.002,
            suction_noise_rel: 0.01,
            suction_noise_cm: 0.5,
            rain_gap_days: (4.0, 12.0),
            wet_h_cm: (15.0, 40.0),
            wetting_records: (4, 12),
            drying_per_day: 0.4,
            max_h_cm: 1000.0,
        }
    }

    #[test]
    fn seasons_are_seeded_and_follow_the_curve() {
        let a = generate(&spec());
        assert_eq!(a, generate(&spec()));
        assert_eq!(a.len(), 60 * 96);
        let rains = a
            .windows(2)
            .filter(|w| w[0].branch == Branch::Drying && w[1].branch == Branch::Wetting)
            .count();
        assert!((4..=15).contains(&rains), "{rains} rain events");
        for r in &a {
            assert!((r.theta - spec().curve.theta(r.h_cm)).abs() < 1e-15);
            assert!(r.h_cm <= 1000.0 && r.h_logged >= 0.0);
        }
        // Wetting lowers the suction, drying raises it (or holds it at the driest).
        for w in a.windows(2) {
            match w[1].branch {
                Branch::Wetting => assert!(w[1].h_cm < w[0].h_cm),
                _ => assert!(w[1].h_cm >= w[0].h_cm),
            }
        }
    }
}
