//! Random-effects means (DerSimonian & Laird 1986) with the between-study variance pooled
//! over groups: how a layer's available water combines its cores.
//!
//! Each study (a core) has an estimate y_i and its within-study variance v_i (the delta
//! method's). Within one group (a layer), with weights w_i = 1 / v_i, the fixed-effect mean
//! is y_w = sum w_i y_i / sum w_i, Q = sum w_i (y_i - y_w)^2 and C = sum w_i - sum w_i^2 /
//! sum w_i. DerSimonian & Laird's method-of-moments estimate of the between-study variance is
//! tau^2 = max(0, (Q - (k - 1)) / C). A group of two cores cannot estimate it well, so it is
//! pooled over the groups, each keeping its own mean: tau^2 = max(0, (sum Q_g - sum (k_g - 1))
//! / sum C_g) over the groups with two or more studies (the pooled within-subgroup estimate of
//! Borenstein, Hedges, Higgins & Rothstein 2009, Introduction to Meta-Analysis, chapter 19).
//! The random-effects mean of a group is then sum w*_i y_i / sum w*_i with w*_i = 1 / (v_i +
//! tau^2), its variance 1 / sum w*_i and its 95 % interval the mean -+ 1.96 sd (normal, as
//! DerSimonian & Laird).

use serde::{Deserialize, Serialize};

/// z(0.975) of the standard normal distribution.
pub const Z975: f64 = 1.959_963_984_540_054;

/// One study: an estimate and its within-study variance (> 0).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Study {
    /// The estimate.
    pub value: f64,
    /// Its variance.
    pub variance: f64,
}

/// The between-study variance pooled over groups.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct PooledTau2 {
    /// tau^2, in the square of the studies' unit.
    pub tau2: f64,
    /// Sum of the groups' Q.
    pub q: f64,
    /// Sum of the groups' degrees of freedom, k_g - 1.
    pub df: usize,
    /// Sum of the groups' C.
    pub c: f64,
    /// Groups it came from (those with two or more studies).
    pub groups: usize,
    /// Studies in those groups.
    pub studies: usize,
}

/// Q, C and k - 1 of one group; `None` unless every variance is positive and finite.
fn moments(group: &[Study]) -> Option<(f64, f64, usize)> {
    if group
        .iter()
        .any(|s| !(s.variance > 0.0 && s.variance.is_finite() && s.value.is_finite()))
    {
        return None;
    }
    let w: Vec<f64> = group.iter().map(|s| 1.0 / s.variance).collect();
    let sw: f64 = w.iter().sum();
    let mean = group.iter().zip(&w).map(|(s, w)| w * s.value).sum::<f64>() / sw;
    let q = group
        .iter()
        .zip(&w)
        .map(|(s, w)| w * (s.value - mean).powi(2))
        .sum();
    let c = sw - w.iter().map(|w| w * w).sum::<f64>() / sw;
    Some((q, c, group.len() - 1))
}

/// tau^2 pooled over the groups with two or more studies (see the module documentation);
/// `None` when there is no such group (or C is 0).
pub fn pooled_tau2(groups: &[Vec<Study>]) -> Option<PooledTau2> {
    let (mut q, mut c, mut df, mut used, mut studies) = (0.0, 0.0, 0, 0, 0);
    for group in groups.iter().filter(|g| g.len() >= 2) {
        let Some((gq, gc, gdf)) = moments(group) else {
            continue;
        };
        q += gq;
        c += gc;
        df += gdf;
        used += 1;
        studies += group.len();
    }
    if used == 0 || c.is_nan() || c <= 0.0 {
        return None;
    }
    let tau2 = ((q - df as f64) / c).max(0.0);
    tau2.is_finite().then_some(PooledTau2 {
        tau2,
        q,
        df,
        c,
        groups: used,
        studies,
    })
}

/// A random-effects mean with its variance and 95 % interval.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct RandomEffectsMean {
    /// The mean, sum w*_i y_i / sum w*_i.
    pub mean: f64,
    /// Its variance, 1 / sum w*_i.
    pub variance: f64,
    /// mean - 1.96 sd.
    pub lo95: f64,
    /// mean + 1.96 sd.
    pub hi95: f64,
}

/// The random-effects mean of one group with between-study variance `tau2`; `None` for an
/// empty group or a variance that is not positive.
pub fn random_effects_mean(group: &[Study], tau2: f64) -> Option<RandomEffectsMean> {
    if group.is_empty()
        || !(tau2 >= 0.0 && tau2.is_finite())
        || group
            .iter()
            .any(|s| !(s.variance > 0.0 && s.variance.is_finite() && s.value.is_finite()))
    {
        return None;
    }
    let w: Vec<f64> = group.iter().map(|s| 1.0 / (s.variance + tau2)).collect();
    let sw: f64 = w.iter().sum();
    let mean = group.iter().zip(&w).map(|(s, w)| w * s.value).sum::<f64>() / sw;
    let variance = 1.0 / sw;
    let half = Z975 * variance.sqrt();
    (mean.is_finite() && half.is_finite()).then_some(RandomEffectsMean {
        mean,
        variance,
        lo95: mean - half,
        hi95: mean + half,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn group(values: &[(f64, f64)]) -> Vec<Study> {
        values
            .iter()
            .map(|&(value, variance)| Study { value, variance })
            .collect()
    }

    #[test]
    fn equal_estimates_have_no_between_study_variance() {
        let g = group(&[(0.1, 1e-4), (0.1, 2e-4), (0.1, 1e-4)]);
        let pooled = pooled_tau2(std::slice::from_ref(&g)).expect("pooled");
        assert!(pooled.tau2.abs() < 1e-18);
        assert_eq!((pooled.groups, pooled.studies, pooled.df), (1, 3, 2));
        let re = random_effects_mean(&g, pooled.tau2).expect("mean");
        assert!((re.mean - 0.1).abs() < 1e-15);
        // 1 / (1e4 + 5e3 + 1e4)
        assert!((re.variance - 4e-5).abs() < 1e-18);
    }

    #[test]
    fn single_studies_and_bad_variances_do_not_pool() {
        assert!(pooled_tau2(&[group(&[(0.1, 1e-4)])]).is_none());
        assert!(pooled_tau2(&[group(&[(0.1, 0.0), (0.2, 1e-4)])]).is_none());
        assert!(random_effects_mean(&[], 0.0).is_none());
    }
}
