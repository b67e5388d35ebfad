//! The random-effects pooling of layer available water against reference values computed
//! with general-purpose libraries (`tests/data/random_effects/dersimonian_laird.py`: statsmodels
//! 0.15 and numpy 2.4); the inputs are invented.
// The reference values as the script printed them (17 significant digits).
#![allow(clippy::excessive_precision)]

use porewise::fit::pooling::{Study, Z975, pooled_tau2, random_effects_mean};

fn studies(values: &[f64], variances: &[f64]) -> Vec<Study> {
    values
        .iter()
        .zip(variances)
        .map(|(&value, &variance)| Study { value, variance })
        .collect()
}

fn close(got: f64, want: f64, rel: f64, what: &str) {
    assert!(
        (got - want).abs() <= rel * want.abs(),
        "{what}: {got:e} vs {want:e}"
    );
}

#[test]
fn one_group_matches_statsmodels_dersimonian_laird() {
    // statsmodels 0.15 combine_effects(method_re="dl"), tests/data/random_effects (case A).
    let group = studies(
        &[0.152, 0.171, 0.139, 0.188, 0.160],
        &[1.2e-4, 0.8e-4, 2.0e-4, 1.5e-4, 0.6e-4],
    );
    let pooled = pooled_tau2(std::slice::from_ref(&group)).expect("tau2");
    close(pooled.tau2, 0.000_133_402_861_445_780_89, 1e-12, "tau2");
    assert_eq!((pooled.groups, pooled.studies, pooled.df), (1, 5, 4));
    let re = random_effects_mean(&group, pooled.tau2).expect("mean");
    close(re.mean, 0.162_744_015_249_086_02, 1e-13, "mean");
    close(re.variance.sqrt(), 0.007_013_317_247_784_146_3, 1e-12, "se");
    close(
        re.hi95 - re.mean,
        Z975 * 0.007_013_317_247_784_146_3,
        1e-12,
        "half-width",
    );
}

#[test]
fn tau2_pooled_over_layers_matches_the_hand_formulas() {
    // numpy 2.4 by hand formulas (Borenstein et al. 2009, ch. 19), tests/data/random_effects
    // (case B): three groups of two or three studies, each with its own mean.
    let groups = vec![
        studies(&[0.121, 0.148], &[0.9e-4, 1.4e-4]),
        studies(&[0.098, 0.112, 0.131], &[0.5e-4, 0.7e-4, 1.1e-4]),
        studies(&[0.175, 0.158], &[2.1e-4, 1.6e-4]),
    ];
    let pooled = pooled_tau2(&groups).expect("tau2");
    close(pooled.tau2, 0.000_165_374_311_492_582_71, 1e-12, "tau2");
    close(pooled.q, 10.887_173_244_580_168, 1e-13, "sum Q");
    close(pooled.c, 41_645.967_758_959_159, 1e-13, "sum C");
    assert_eq!((pooled.groups, pooled.studies, pooled.df), (3, 7, 4));
    let want = [
        (0.133_296_252_059_600_94, 0.000_139_072_574_319_995_92),
        (0.112_318_922_679_003_37, 7.985_273_846_464_766_1e-5),
        (0.165_893_505_765_035_23, 0.000_174_295_252_459_578_48),
    ];
    for (group, (mean, variance)) in groups.iter().zip(want) {
        let re = random_effects_mean(group, pooled.tau2).expect("mean");
        close(re.mean, mean, 1e-13, "group mean");
        close(re.variance, variance, 1e-12, "group variance");
    }
    // A group of one study alone adds nothing to the pool.
    let mut more = groups.clone();
    more.push(studies(&[0.3], &[1e-4]));
    assert_eq!(pooled_tau2(&more), Some(pooled));
}
