//! The demo's field logger: one season at the upper terrace `TER1`, a tensiometer and a
//! water-content probe side by side at 15 cm (in the A horizon) and at 45 cm (in the Bt),
//! logging hourly in local time (UTC+02:00).
//!
//! The soil follows its layer's demo curve (the Carsel & Parrish (1988) class means the lab
//! cores are drawn around), with two field touches: air trapped in the field keeps the soil
//! below its lab saturation (theta_s 0.03 lower), and the wetting curve lies below the drying
//! one (alpha twice the drying alpha, from memory of the usual ratio), reversals following
//! scaled scanning curves. Rain events are shared by both depths; the deeper probes answer
//! later, less and slower. A few problems are planted for the quality marks: a dry spell that
//! takes the shallow tensiometer past its working range, a stuck stretch of the deep
//! water-content probe and a one-record spike of the shallow tensiometer.

use std::fmt::Write as _;

use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, Normal};

use crate::model::units::{CM_PER_HPA, CM_PER_KPA};

use super::{DemoFile, SITES, Texture, vg_theta};

/// Name of the logger file in `demo-db/`.
pub const FILE: &str = "logger-ter1.csv";
/// The site the logger stands at.
pub const SITE: &str = "TER1";
/// First record: 2026-05-01T00:00:00Z.
pub const START: i64 = 1_777_593_600;
/// Length of the season, days (May, June and July).
pub const DAYS: i64 = 92;
/// Logging interval, seconds.
pub const INTERVAL_S: i64 = 3600;
/// The logger clock's offset from UTC, seconds (it writes local time, +02:00).
const LOCAL_OFFSET_S: i64 = 2 * 3600;
/// Seed of the season (its own, so the lab files do not change with it).
const SEED: u64 = 0x00D0_5EED_7E51;

/// Records of one sensor in the season.
pub const RECORDS: usize = (DAYS * 86_400 / INTERVAL_S) as usize;

/// How a probe writes its values.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Unit {
    /// Negative pressure in kPa, two decimals.
    KpaPressure,
    /// Positive suction in hPa, one decimal.
    HpaSuction,
    /// Water content in percent, one decimal.
    Percent,
    /// Water content as a fraction, three decimals.
    Fraction,
}

impl Unit {
    fn write(self, value: f64) -> (String, &'static str) {
        match self {
            Unit::KpaPressure => (format!("{:.2}", -value / CM_PER_KPA), "kPa"),
            Unit::HpaSuction => (format!("{:.1}", value / CM_PER_HPA), "hPa"),
            Unit::Percent => (format!("{:.1}", value * 100.0), "%"),
            Unit::Fraction => (format!("{value:.3}"), "m3/m3"),
        }
    }
}

/// A depth with its two probes and how the soil there answers the weather.
struct Probe {
    depth_cm: f64,
    tensiometer: (&'static str, Unit),
    water: (&'static str, Unit),
    /// Suction right after the heaviest and the lightest rain, cm.
    wet_h_cm: (f64, f64),
    /// Growth of ln(h) per day while drying.
    drying_per_day: f64,
    /// The driest the soil gets, cm.
    max_h_cm: f64,
    /// Hours a rain takes to reach the depth.
    lag_h: usize,
    /// Records a rain takes to wet it (heavier rain, more records).
    wetting_records: (usize, usize),
    /// Suction on the first day, cm.
    start_h_cm: f64,
}

const PROBES: [Probe; 2] = [
    Probe {
        depth_cm: 15.0,
        tensiometer: ("T15", Unit::KpaPressure),
        water: ("W15", Unit::Percent),
        wet_h_cm: (12.0, 60.0),
        drying_per_day: 0.36,
        max_h_cm: 1150.0,
        lag_h: 1,
        wetting_records: (3, 8),
        start_h_cm: 40.0,
    },
    Probe {
        depth_cm: 45.0,
        tensiometer: ("T45", Unit::HpaSuction),
        water: ("W45", Unit::Fraction),
        wet_h_cm: (35.0, 110.0),
        drying_per_day: 0.16,
        max_h_cm: 640.0,
        lag_h: 7,
        wetting_records: (8, 20),
        start_h_cm: 70.0,
    },
];

/// The planted problems, told in `demo-db/README.md`.
pub struct PlantedRecords {
    /// Sensor id.
    pub sensor: &'static str,
    /// First record of the problem (0 = the season's first hour).
    pub from: usize,
    /// Records it lasts.
    pub records: usize,
    /// What happened.
    pub story: &'static str,
}

/// The stuck deep water-content probe: it repeats one value for 14 hours in June.
pub const STUCK: PlantedRecords = PlantedRecords {
    sensor: "W45",
    from: 34 * 24 + 5,
    records: 14,
    story: "the probe's reading froze for 14 hours (a logger channel hung)",
};

/// The spike of the shallow tensiometer: one record 30 kPa too dry, in May.
pub const SPIKE: PlantedRecords = PlantedRecords {
    sensor: "T15",
    from: 23 * 24 + 14,
    records: 1,
    story: "one reading 30 kPa too dry (the cup was knocked while mowing)",
};

/// Day the planted dry spell begins, and how long it lasts, days.
pub const DRY_SPELL: (f64, f64) = (58.0, 11.0);

/// Suction the spike adds, cm (30 kPa).
const SPIKE_CM: f64 = 30.0 * CM_PER_KPA;

/// The rain events of the season: (record it starts at, intensity 0-1).
fn rains(rng: &mut ChaCha8Rng) -> Vec<(usize, f64)> {
    let per_day = 86_400 / INTERVAL_S as usize;
    let mut out = Vec::new();
    let mut day = rng.random_range(1.5..4.0);
    while day < DAYS as f64 {
        out.push(((day * per_day as f64) as usize, rng.random_range(0.0..1.0)));
        let next = day + rng.random_range(2.5..8.0);
        // The planted dry spell: no rain from its first day to its end.
        let (first, length) = DRY_SPELL;
        day = if (first..first + length).contains(&next) {
            first + length
        } else {
            next
        };
    }
    out
}

/// van Genuchten curve of a texture in the field (theta_s lowered by trapped air), with the
/// wetting alpha twice the drying one: (theta_r, theta_s, alpha_drying, alpha_wetting, n).
fn field_curve(t: Texture) -> (f64, f64, f64, f64, f64) {
    (t.theta_r, t.theta_s - 0.03, t.alpha, 2.0 * t.alpha, t.n)
}

/// The true state of one depth through the season: suction (cm) and water content per record.
fn soil(probe: &Probe, texture: Texture, rains: &[(usize, f64)]) -> Vec<(f64, f64)> {
    let (tr, ts, ad, aw, n) = field_curve(texture);
    let drying = |h: f64| vg_theta(h, tr, ts, ad, n);
    let wetting = |h: f64| vg_theta(h, tr, ts, aw, n);
    let step = INTERVAL_S as f64 / 86_400.0;
    let mut h = probe.start_h_cm;
    // The last reversal: suction and water content, and whether the soil is wetting since.
    let mut turn = (h, drying(h));
    let mut wet: Option<(usize, f64)> = None;
    let mut out = Vec::with_capacity(RECORDS);
    for i in 0..RECORDS {
        if let Some(&(_, intensity)) = rains.iter().find(|(at, _)| at + probe.lag_h == i) {
            let (lo, hi) = probe.wet_h_cm;
            let target = hi - (hi - lo) * intensity;
            // A light rain on a soil already wetter than it would leave it does not count.
            if target < 0.8 * h {
                let (r0, r1) = probe.wetting_records;
                let records = r0 + ((r1 - r0) as f64 * intensity).round() as usize;
                if wet.is_none() {
                    turn = (h, out.last().map_or(drying(h), |&(_, t)| t));
                }
                wet = Some((records.max(1), target));
            }
        }
        let theta = if let Some((left, target)) = wet {
            h *= (target / h).powf(1.0 / left as f64);
            wet = (left > 1).then_some((left - 1, target));
            // Wetting scanning curve from the reversal point up to saturation.
            let (h0, t0) = turn;
            let theta = ts - (ts - t0) * (ts - wetting(h)) / (ts - wetting(h0)).max(1e-9);
            if wet.is_none() {
                turn = (h, theta);
            }
            theta
        } else {
            h = (h * (probe.drying_per_day * step).exp()).min(probe.max_h_cm);
            // Drying scanning curve from the reversal point down to theta_r.
            let (h1, t1) = turn;
            tr + (t1 - tr) * (drying(h) - tr) / (drying(h1) - tr).max(1e-9)
        };
        out.push((h, theta));
    }
    out
}

/// The texture of the TER1 layer holding a depth.
fn texture_at(depth_cm: f64) -> Texture {
    SITES
        .iter()
        .find(|s| s.code == SITE)
        .and_then(|s| {
            s.layers
                .iter()
                .find(|(top, bottom, ..)| (*top..*bottom).contains(&depth_cm))
        })
        .map_or_else(
            || unreachable!("the probes sit inside TER1's layers"),
            |l| l.3,
        )
}

/// The local time of a record as the logger writes it: `2026-05-01T02:00+02:00`.
fn local_time(utc: i64) -> String {
    let local = chrono::DateTime::from_timestamp(utc + LOCAL_OFFSET_S, 0)
        .unwrap_or_else(|| unreachable!("the season lies in 2026"));
    format!("{}+02:00", local.format("%Y-%m-%dT%H:%M"))
}

/// Generate the logger file.
pub fn file() -> DemoFile {
    let mut rng = ChaCha8Rng::seed_from_u64(SEED);
    let unit = Normal::new(0.0, 1.0).unwrap_or_else(|_| unreachable!("unit normal is valid"));
    let rains = rains(&mut rng);
    // Each probe's logged values, in file order (time, then probe).
    let mut logged: Vec<[(f64, f64); 2]> = vec![[(0.0, 0.0); 2]; RECORDS];
    for (p, probe) in PROBES.iter().enumerate() {
        let truth = soil(probe, texture_at(probe.depth_cm), &rains);
        for (i, &(h, theta)) in truth.iter().enumerate() {
            let mut h_log =
                (h * (1.0 + 0.01 * unit.sample(&mut rng)) + 0.3 * unit.sample(&mut rng)).max(0.0);
            let theta_log = (theta + 0.003 * unit.sample(&mut rng)).clamp(0.0, 1.0);
            if probe.tensiometer.0 == SPIKE.sensor
                && (SPIKE.from..SPIKE.from + SPIKE.records).contains(&i)
            {
                h_log += SPIKE_CM;
            }
            logged[i][p] = (h_log, theta_log);
        }
        if probe.water.0 == STUCK.sensor {
            let frozen = logged[STUCK.from][p].1;
            for row in &mut logged[STUCK.from..STUCK.from + STUCK.records] {
                row[p].1 = frozen;
            }
        }
    }
    let mut text = String::from("site,depth_cm,sensor,sensor_id,time,value,unit\n");
    for (i, row) in logged.iter().enumerate() {
        let time = local_time(START + i as i64 * INTERVAL_S);
        for (probe, &(h, theta)) in PROBES.iter().zip(row) {
            for (sensor, (id, unit), value) in [
                ("tensiometer", probe.tensiometer, h),
                ("water_content", probe.water, theta),
            ] {
                let (value, unit) = unit.write(value);
                let _ = writeln!(
                    text,
                    "{SITE},{},{sensor},{id},{time},{value},{unit}",
                    probe.depth_cm
                );
            }
        }
    }
    DemoFile { name: FILE, text }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_season_is_hourly_for_four_sensors_and_stays_small() {
        let f = file();
        assert_eq!(f.text.lines().count(), 1 + 4 * RECORDS);
        assert!(f.text.len() < 600_000, "{} bytes", f.text.len());
        assert!(
            f.text
                .lines()
                .nth(1)
                .is_some_and(|l| l.starts_with("TER1,15,tensiometer,T15,2026-05-01T02:00+02:00,-"))
        );
    }

    #[test]
    fn rain_wets_and_the_dry_spell_goes_past_the_working_range() {
        let mut rng = ChaCha8Rng::seed_from_u64(SEED);
        let rains = rains(&mut rng);
        assert!((8..=25).contains(&rains.len()), "{} rains", rains.len());
        let shallow = soil(&PROBES[0], texture_at(15.0), &rains);
        let deep = soil(&PROBES[1], texture_at(45.0), &rains);
        let limit = 85.0 * CM_PER_KPA;
        let beyond = shallow.iter().filter(|(h, _)| *h > limit).count();
        assert!((15..=120).contains(&beyond), "{beyond} hours past 85 kPa");
        assert!(deep.iter().all(|(h, _)| *h < limit));
        // Water content stays within the field curve's range and falls as suction rises.
        for (h, theta) in shallow.iter().chain(&deep) {
            assert!(*h > 0.0 && (0.05..0.42).contains(theta), "{h} {theta}");
        }
    }
}
