//! In-situ retention pairs from a tensiometer and a water-content sensor at the same depth.
//!
//! Each tensiometer record is matched with the nearest water-content record within a time
//! window; each pair is labelled drying or wetting from the direction the water content is
//! moving (smoothed, so sensor noise does not flip it); the season is then thinned to a few
//! points per decade of suction per branch, each the median of its bin, so a fit sees the
//! shape of the curve rather than thousands of nearly equal points.

use crate::model::domain::Branch;

/// Points per decade of suction per branch kept by default.
pub const DEFAULT_PER_DECADE: usize = 8;
/// Pairing window by default, seconds (30 min).
pub const DEFAULT_WINDOW_S: i64 = 30 * 60;
/// Records in the running median that smooths the water content before branches are read.
pub const DEFAULT_SMOOTHING: usize = 5;
/// The smallest rise or fall of the smoothed water content that turns the branch, m3/m3.
pub const MIN_SWING_THETA: f64 = 0.005;
/// The turning swing is at least this many times the sensor noise.
pub const SWING_PER_NOISE: f64 = 5.0;
/// Suctions below this (cm) share one bin: near saturation a log scale has no bottom.
pub const WET_BIN_BELOW_CM: f64 = 1.0;

/// One record of a series: time (s since 1970 UTC) and value (h in cm, or theta).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Point {
    /// Seconds since 1970-01-01 UTC.
    pub time: i64,
    /// Suction head (cm) or volumetric water content (m3/m3).
    pub value: f64,
}

/// A matched tensiometer and water-content record.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Pair {
    /// Time of the tensiometer record.
    pub time: i64,
    /// Suction head, cm.
    pub h_cm: f64,
    /// Water content, m3/m3.
    pub theta: f64,
    /// Drying, wetting, or unknown when the water content never moved enough to tell.
    pub branch: Branch,
}

/// One thinned point: the median of the pairs in a suction bin of one branch.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct BinnedPoint {
    /// Median suction head of the bin, cm.
    pub h_cm: f64,
    /// Median water content of the bin, m3/m3.
    pub theta: f64,
    /// Branch of every pair in the bin.
    pub branch: Branch,
    /// Pairs in the bin.
    pub pairs: usize,
    /// Earliest and latest pair time.
    pub first: i64,
    /// Latest pair time.
    pub last: i64,
    /// Median pair time.
    pub median_time: i64,
}

/// How pairs are made and thinned.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PairingSettings {
    /// Largest time between a tensiometer record and its water-content record, seconds.
    pub window_s: i64,
    /// Bins per decade of suction per branch (at least 1).
    pub per_decade: usize,
    /// Running-median length for the branch labels (odd; 1 turns smoothing off).
    pub smoothing: usize,
}

impl Default for PairingSettings {
    fn default() -> Self {
        Self {
            window_s: DEFAULT_WINDOW_S,
            per_decade: DEFAULT_PER_DECADE,
            smoothing: DEFAULT_SMOOTHING,
        }
    }
}

fn median(values: &mut [f64]) -> f64 {
    values.sort_by(f64::total_cmp);
    let n = values.len();
    if n == 0 {
        return f64::NAN;
    }
    if n % 2 == 1 {
        values[n / 2]
    } else {
        0.5 * (values[n / 2 - 1] + values[n / 2])
    }
}

/// Running median of `values` over `width` records (shrinking at the ends).
pub fn running_median(values: &[f64], width: usize) -> Vec<f64> {
    let half = width.max(1) / 2;
    let mut window = Vec::with_capacity(2 * half + 1);
    (0..values.len())
        .map(|i| {
            let lo = i.saturating_sub(half);
            let hi = (i + half + 1).min(values.len());
            window.clear();
            window.extend_from_slice(&values[lo..hi]);
            median(&mut window)
        })
        .collect()
}

/// The swing that turns a branch for this water-content series: [`SWING_PER_NOISE`] times
/// a robust noise estimate (median absolute deviation from the running median), at least
/// [`MIN_SWING_THETA`].
pub fn turning_swing(values: &[f64], smoothed: &[f64]) -> f64 {
    let mut dev: Vec<f64> = values
        .iter()
        .zip(smoothed)
        .map(|(v, s)| (v - s).abs())
        .collect();
    let sigma = if dev.is_empty() {
        0.0
    } else {
        1.4826 * median(&mut dev)
    };
    (SWING_PER_NOISE * sigma).max(MIN_SWING_THETA)
}

/// The peaks and troughs of a smoothed series whose rise or fall to the next one is at least
/// `swing`, in order: `(index, is_peak)`, troughs and peaks alternating. The last extreme is
/// left out (the series has not turned back from it by the swing).
fn turning_points(s: &[f64], swing: f64) -> Vec<(usize, bool)> {
    let mut turns = Vec::new();
    let (mut lo, mut hi) = (0usize, 0usize);
    // The direction since the last turning point (`true` = rising) and the extreme reached.
    let mut rising: Option<bool> = None;
    let mut ext = 0usize;
    for (i, &v) in s.iter().enumerate() {
        match rising {
            None => {
                if v < s[lo] {
                    lo = i;
                }
                if v > s[hi] {
                    hi = i;
                }
                if v - s[lo] >= swing {
                    turns.push((lo, false));
                    (rising, ext) = (Some(true), i);
                } else if s[hi] - v >= swing {
                    turns.push((hi, true));
                    (rising, ext) = (Some(false), i);
                }
            }
            Some(up) => {
                if (up && v > s[ext]) || (!up && v < s[ext]) {
                    ext = i;
                }
                let back = if up { s[ext] - v } else { v - s[ext] };
                if back >= swing {
                    turns.push((ext, up));
                    (rising, ext) = (Some(!up), i);
                }
            }
        }
    }
    turns
}

/// Label each record of a water-content series drying or wetting.
///
/// The series is smoothed with a running median; turning points are the peaks and troughs
/// whose rise or fall to the next one is at least the turning swing ([`turning_swing`]).
/// Records after a trough up to the next peak are wetting, after a peak up to the next trough
/// drying. Wetting is the quick rise after rain; a flat stretch within one swing of an
/// extreme (a soil too dry to dry further, or slow drainage after a rain) counts as drying, so
/// a trough moves to the end of the flat before the rise and a peak to the start of the flat
/// after it. A series that never moves by the swing is all unknown.
pub fn label_branches(theta: &[Point], smoothing: usize) -> Vec<Branch> {
    let values: Vec<f64> = theta.iter().map(|p| p.value).collect();
    let s = running_median(&values, smoothing);
    let swing = turning_swing(&values, &s);
    let n = s.len();
    let mut labels = vec![Branch::Unknown; n];
    let turns = turning_points(&s, swing);
    if turns.is_empty() {
        return labels;
    }
    let flat = swing;
    let mut moved: Vec<(usize, bool)> = Vec::with_capacity(turns.len());
    for (k, &(i, peak)) in turns.iter().enumerate() {
        let j = if peak {
            let from = moved.last().map_or(0, |&(t, _)| t);
            (from..=i).find(|&j| s[j] >= s[i] - flat).unwrap_or(i)
        } else {
            let to = turns.get(k + 1).map_or(n - 1, |&(t, _)| t);
            (i..=to).rev().find(|&j| s[j] <= s[i] + flat).unwrap_or(i)
        };
        moved.push((j, peak));
    }
    // Each stretch ending at a peak rose (wetting); one ending at a trough fell (drying).
    let branch_to = |peak: bool| {
        if peak {
            Branch::Wetting
        } else {
            Branch::Drying
        }
    };
    let (first, first_peak) = moved[0];
    fill(&mut labels, 0, first, branch_to(first_peak));
    for pair in moved.windows(2) {
        fill(&mut labels, pair[0].0 + 1, pair[1].0, branch_to(pair[1].1));
    }
    let (last, last_peak) = moved[moved.len() - 1];
    fill(&mut labels, last + 1, n - 1, branch_to(!last_peak));
    // A series that starts at its first turning point: the first record goes with the next.
    if first == 0 && n > 1 {
        labels[0] = labels[1];
    }
    labels
}

/// Set `labels[from..=to]` (clamped) to `branch`.
fn fill(labels: &mut [Branch], from: usize, to: usize, branch: Branch) {
    let to = to.min(labels.len().saturating_sub(1));
    if from <= to {
        for l in &mut labels[from..=to] {
            *l = branch;
        }
    }
}

/// Match every tensiometer record with the nearest water-content record within `window_s`;
/// the pair takes the water record's branch. Both series must be in time order.
pub fn match_records(
    tensiometer: &[Point],
    water: &[Point],
    branches: &[Branch],
    window_s: i64,
) -> Vec<Pair> {
    let mut pairs = Vec::with_capacity(tensiometer.len().min(water.len()));
    let mut j = 0usize;
    for t in tensiometer {
        while j + 1 < water.len() && water[j + 1].time <= t.time {
            j += 1;
        }
        let mut best: Option<usize> = None;
        for k in [j, j + 1] {
            let Some(w) = water.get(k) else { continue };
            let gap = (w.time - t.time).abs();
            if gap <= window_s && best.is_none_or(|b| gap < (water[b].time - t.time).abs()) {
                best = Some(k);
            }
        }
        if let Some(k) = best {
            pairs.push(Pair {
                time: t.time,
                h_cm: t.value,
                theta: water[k].value,
                branch: branches.get(k).copied().unwrap_or(Branch::Unknown),
            });
        }
    }
    pairs
}

/// The bin of a suction: `per_decade` bins per decade of cm, one bin below
/// [`WET_BIN_BELOW_CM`].
fn bin_of(h_cm: f64, per_decade: usize) -> i64 {
    if h_cm < WET_BIN_BELOW_CM {
        i64::MIN
    } else {
        (h_cm.log10() * per_decade.max(1) as f64).floor() as i64
    }
}

/// Thin pairs to the medians of `per_decade` suction bins per decade per branch, ordered by
/// branch (drying, wetting, unknown) and suction.
pub fn thin(pairs: &[Pair], per_decade: usize) -> Vec<BinnedPoint> {
    let mut keyed: Vec<(u8, i64, usize)> = pairs
        .iter()
        .enumerate()
        .map(|(i, p)| (branch_order(p.branch), bin_of(p.h_cm, per_decade), i))
        .collect();
    keyed.sort_unstable();
    let mut out = Vec::new();
    let mut start = 0;
    while start < keyed.len() {
        let (b, bin, _) = keyed[start];
        let mut end = start;
        while end < keyed.len() && keyed[end].0 == b && keyed[end].1 == bin {
            end += 1;
        }
        let members: Vec<&Pair> = keyed[start..end].iter().map(|k| &pairs[k.2]).collect();
        let mut h: Vec<f64> = members.iter().map(|p| p.h_cm).collect();
        let mut theta: Vec<f64> = members.iter().map(|p| p.theta).collect();
        let mut times: Vec<i64> = members.iter().map(|p| p.time).collect();
        times.sort_unstable();
        out.push(BinnedPoint {
            h_cm: median(&mut h),
            theta: median(&mut theta),
            branch: members[0].branch,
            pairs: members.len(),
            first: times[0],
            last: times[times.len() - 1],
            median_time: times[times.len() / 2],
        });
        start = end;
    }
    out
}

fn branch_order(b: Branch) -> u8 {
    match b {
        Branch::Drying => 0,
        Branch::Wetting => 1,
        Branch::Unknown => 2,
    }
}

/// What pairing one depth gave.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Pairing {
    /// Every matched pair, in tensiometer order (sensor by sensor).
    pub pairs: Vec<Pair>,
    /// The thinned points.
    pub points: Vec<BinnedPoint>,
}

impl Pairing {
    /// Pairs on a branch.
    pub fn count(&self, branch: Branch) -> usize {
        self.pairs.iter().filter(|p| p.branch == branch).count()
    }
}

/// Pair every tensiometer with every water-content sensor of one depth and thin the result.
///
/// Each water-content series gets its own branch labels; all pairs go into one thinning.
pub fn pair_depth(
    tensiometers: &[Vec<Point>],
    water: &[Vec<Point>],
    settings: &PairingSettings,
) -> Pairing {
    let mut pairs = Vec::new();
    for w in water {
        let branches = label_branches(w, settings.smoothing);
        for t in tensiometers {
            pairs.extend(match_records(t, w, &branches, settings.window_s));
        }
    }
    let points = thin(&pairs, settings.per_decade);
    Pairing { pairs, points }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn series(values: &[f64]) -> Vec<Point> {
        values
            .iter()
            .enumerate()
            .map(|(i, &v)| Point {
                time: i as i64 * 900,
                value: v,
            })
            .collect()
    }

    #[test]
    fn branches_follow_the_water_content_and_ignore_noise() {
        // Drying, a rain (rise over 4 records), drying again; +-0.001 jitter on top.
        let mut v = Vec::new();
        for i in 0..40 {
            v.push(0.30 - 0.002 * f64::from(i));
        }
        for i in 1..=4 {
            v.push(0.22 + 0.03 * f64::from(i));
        }
        for i in 1..40 {
            v.push(0.34 - 0.002 * f64::from(i));
        }
        for (i, x) in v.iter_mut().enumerate() {
            *x += if i % 2 == 0 { 0.001 } else { -0.001 };
        }
        let labels = label_branches(&series(&v), DEFAULT_SMOOTHING);
        let wet: Vec<usize> = (0..labels.len())
            .filter(|&i| labels[i] == Branch::Wetting)
            .collect();
        // The rise is records 40-43; the running median moves the turning points by two at most.
        assert!(wet.len() >= 3 && wet.len() <= 7, "{wet:?}");
        assert!(wet.iter().all(|&i| (38..=45).contains(&i)), "{wet:?}");
        assert!(labels[..38].iter().all(|&b| b == Branch::Drying));
        assert!(labels[46..].iter().all(|&b| b == Branch::Drying));
        // Flat noise alone never turns a branch.
        let flat: Vec<f64> = (0..50).map(|i| 0.3 + 0.001 * f64::from(i % 3)).collect();
        assert!(
            label_branches(&series(&flat), DEFAULT_SMOOTHING)
                .iter()
                .all(|&b| b == Branch::Unknown)
        );
    }

    #[test]
    fn matching_takes_the_nearest_record_within_the_window() {
        let t = vec![
            Point {
                time: 0,
                value: 100.0,
            },
            Point {
                time: 1000,
                value: 110.0,
            },
            Point {
                time: 5000,
                value: 120.0,
            },
        ];
        let w = vec![
            Point {
                time: 100,
                value: 0.30,
            },
            Point {
                time: 800,
                value: 0.29,
            },
            Point {
                time: 9000,
                value: 0.28,
            },
        ];
        let b = vec![Branch::Drying; 3];
        let pairs = match_records(&t, &w, &b, 600);
        assert_eq!(pairs.len(), 2);
        assert_eq!((pairs[0].theta, pairs[1].theta), (0.30, 0.29));
        assert!(match_records(&t, &[], &[], 600).is_empty());
    }

    #[test]
    fn thinning_keeps_medians_per_decade_and_branch() {
        let mut pairs = Vec::new();
        for (i, h) in [10.0, 11.0, 12.0, 100.0, 0.5].into_iter().enumerate() {
            pairs.push(Pair {
                time: i as i64,
                h_cm: h,
                theta: 0.4 - h / 1000.0,
                branch: Branch::Drying,
            });
        }
        pairs.push(Pair {
            time: 9,
            h_cm: 10.5,
            theta: 0.35,
            branch: Branch::Wetting,
        });
        let points = thin(&pairs, 1);
        let summary: Vec<(Branch, f64, usize)> =
            points.iter().map(|p| (p.branch, p.h_cm, p.pairs)).collect();
        assert_eq!(
            summary,
            vec![
                (Branch::Drying, 0.5, 1),
                (Branch::Drying, 11.0, 3),
                (Branch::Drying, 100.0, 1),
                (Branch::Wetting, 10.5, 1),
            ]
        );
        assert!((points[1].theta - 0.389).abs() < 1e-12);
        assert_eq!((points[1].first, points[1].last), (0, 2));
    }
}
