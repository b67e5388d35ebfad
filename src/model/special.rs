//! Special functions the models need beyond `std`: the regularised incomplete beta function.
//!
//! Mualem's conductivity integral for van Genuchten's curve with m free has its closed form
//! through I_x(a, b) (van Genuchten 1980). The general-purpose implementations at hand either
//! take x alone (so 1 - x, which carries the curve's behaviour near saturation, is lost to
//! rounding) or set I to 1 within 1e-15 of x = 1, which is wrong by percents when b is small.
//! This one takes x and 1 - x separately and keeps relative precision at both ends.

/// Relative size of the last continued-fraction step that ends the iteration.
const CF_TOLERANCE: f64 = 1e-16;

/// Most continued-fraction steps: for the arguments the models produce (a <= 12, b < 1) it
/// converges in a few dozen; the limit only guards against a bad argument.
const CF_MAX_STEPS: usize = 2000;

/// Smallest magnitude the modified Lentz algorithm lets a denominator take.
const TINY: f64 = 1e-300;

/// ln B(a, b) = ln Gamma(a) + ln Gamma(b) - ln Gamma(a + b) for a, b > 0 (musl's lgamma
/// through the `libm` crate, about one unit in the last place).
pub fn ln_beta(a: f64, b: f64) -> f64 {
    libm::lgamma(a) + libm::lgamma(b) - libm::lgamma(a + b)
}

/// The regularised incomplete beta function I_x(a, b) = B(x; a, b) / B(a, b), with `y` = 1 - x
/// given separately (exactly, by the caller) so that both tails keep their relative precision.
///
/// `None` unless a > 0, b > 0, x and y in [0, 1] and x + y within rounding of 1 (64 units
/// in the last place).
///
/// The continued fraction of DLMF 8.17.22 (Lentz's method), applied to I_x(a, b) when
/// x < (a + 1) / (a + b + 2) and to 1 - I_y(b, a) otherwise, where it converges fast.
pub fn beta_reg(a: f64, b: f64, x: f64, y: f64) -> Option<f64> {
    let valid = a > 0.0
        && b > 0.0
        && a.is_finite()
        && b.is_finite()
        && (0.0..=1.0).contains(&x)
        && (0.0..=1.0).contains(&y)
        && (x + y - 1.0).abs() <= 64.0 * f64::EPSILON;
    if !valid {
        return None;
    }
    if x == 0.0 {
        return Some(0.0);
    }
    if y == 0.0 {
        return Some(1.0);
    }
    if x < (a + 1.0) / (a + b + 2.0) {
        lower_tail(a, b, x, y)
    } else {
        lower_tail(b, a, y, x).map(|v| 1.0 - v)
    }
}

/// I_x(a, b) from its continued fraction (x below the switch point, so it converges).
fn lower_tail(a: f64, b: f64, x: f64, y: f64) -> Option<f64> {
    // x^a y^b / (a B(a, b)), in logarithms so that tiny x does not underflow early.
    let front = (a * x.ln() + b * y.ln() - ln_beta(a, b)).exp() / a;
    let cf = continued_fraction(a, b, x)?;
    let v = front * cf;
    v.is_finite().then_some(v.clamp(0.0, 1.0))
}

/// 1 / (1 + d1 / (1 + d2 / (1 + ...))) with DLMF 8.17.22's coefficients d_k, by modified Lentz.
fn continued_fraction(a: f64, b: f64, x: f64) -> Option<f64> {
    let guard = |v: f64| if v.abs() < TINY { TINY } else { v };
    let mut c = 1.0;
    let mut d = 1.0 / guard(1.0 - (a + b) * x / (a + 1.0));
    let mut f = d;
    for m in 1..=CF_MAX_STEPS {
        let m = m as f64;
        // Even step: d_2m = m (b - m) x / ((a + 2m - 1)(a + 2m)).
        let even = m * (b - m) * x / ((a + 2.0 * m - 1.0) * (a + 2.0 * m));
        d = 1.0 / guard(1.0 + even * d);
        c = guard(1.0 + even / c);
        f *= d * c;
        // Odd step: d_2m+1 = -(a + m)(a + b + m) x / ((a + 2m)(a + 2m + 1)).
        let odd = -(a + m) * (a + b + m) * x / ((a + 2.0 * m) * (a + 2.0 * m + 1.0));
        d = 1.0 / guard(1.0 + odd * d);
        c = guard(1.0 + odd / c);
        let step = d * c;
        f *= step;
        if (step - 1.0).abs() <= CF_TOLERANCE {
            return f.is_finite().then_some(f);
        }
    }
    None
}

#[cfg(test)]
#[allow(
    clippy::unreadable_literal,
    clippy::float_cmp,
    clippy::excessive_precision
)]
mod tests {
    use super::*;

    fn rel(got: f64, want: f64) -> f64 {
        (got - want).abs() / want.abs()
    }

    #[test]
    fn incomplete_beta_matches_high_precision_values() {
        // mpmath 1.3.0 betainc(a, b, 0, x, regularized=True), 50 digits
        // (tests/data/high_precision.py), at these doubles.
        let cases = [
            (
                0.9666666666666666,
                0.3333333333333333,
                0.0001,
                0.000046170951232821264593,
            ),
            (2.5, 0.5, 0.3, 0.018927124071945651653),
            (1.0, 0.05, 0.999, 0.29205421561586207133),
            (10.5, 0.9, 0.95, 0.5341209630206069568),
            (0.05, 0.9, 1e-12, 0.24904904655671473875),
            (3.25, 0.75, 0.5, 0.070300387867873053141),
        ];
        for (a, b, x, want) in cases {
            let got = beta_reg(a, b, x, 1.0 - x).expect("valid");
            assert!(
                rel(got, want) < 1e-13,
                "I({x}; {a}, {b}) = {got:e}, want {want:e}"
            );
        }
    }

    #[test]
    fn the_upper_tail_keeps_its_precision_when_one_minus_x_is_tiny() {
        // 1 - I_x(2.5, 0.05) = I_y(0.05, 2.5) with y = 1e-15: 0.18931938329386044379
        // (mpmath 1.3.0, 50 digits). Rounding x to 1 (or to within 1e-15 of it) would give 0.
        let y = 1e-15;
        let got = 1.0 - beta_reg(2.5, 0.05, 1.0 - y, y).expect("valid");
        assert!(rel(got, 0.18931938329386044379) < 1e-12, "{got:e}");
        let direct = beta_reg(0.05, 2.5, y, 1.0 - y).expect("valid");
        assert!(rel(direct, 0.18931938329386044379) < 1e-13, "{direct:e}");
    }

    #[test]
    fn closed_forms_and_symmetry() {
        // I_x(1, b) = 1 - (1 - x)^b and I_x(a, 1) = x^a (DLMF 8.17.5 with 8.17.4).
        for &(x0, b) in &[(0.3, 0.4), (0.9, 2.5), (1e-9, 0.7)] {
            // x and y = 1 - x both exact.
            let y: f64 = 1.0 - x0;
            let x = 1.0 - y;
            let want = -(b * (-x).ln_1p()).exp_m1();
            let got = beta_reg(1.0, b, x, y).expect("valid");
            assert!(
                rel(got, want) < 1e-14,
                "I({x}; 1, {b}) = {got:e}, want {want:e}"
            );
            let got = beta_reg(b, 1.0, x, y).expect("valid");
            assert!(rel(got, x.powf(b)) < 1e-14, "I({x}; {b}, 1) = {got:e}");
            // I_x(a, b) + I_y(b, a) = 1.
            let s = beta_reg(2.0, b, x, y).expect("valid") + beta_reg(b, 2.0, y, x).expect("valid");
            assert!((s - 1.0).abs() < 1e-15, "{s}");
        }
        assert_eq!(beta_reg(2.0, 3.0, 0.0, 1.0), Some(0.0));
        assert_eq!(beta_reg(2.0, 3.0, 1.0, 0.0), Some(1.0));
        assert_eq!(beta_reg(0.0, 3.0, 0.5, 0.5), None);
        assert_eq!(beta_reg(2.0, 3.0, 0.5, 0.6), None);
        assert_eq!(beta_reg(2.0, f64::NAN, 0.5, 0.5), None);
    }
}
