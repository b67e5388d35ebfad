//! One-dimensional minimisation by golden-section search, for the places that refine a grid's
//! best point along one axis (the exponent of a power law, a design point, the air entry).

/// The golden ratio's conjugate, (sqrt 5 - 1) / 2: each step keeps this share of the bracket.
const RATIO: f64 = 0.618_033_988_749_894_9;

/// The minimum of `f` on [lo, hi], assumed unimodal there, by golden-section search until the
/// bracket is narrower than `rel_tol` times (1 + the larger of |lo|, |hi|), or after
/// `max_steps` steps. Returns (x, f(x)); never worse than either end of the interval.
pub fn golden_minimum(
    mut f: impl FnMut(f64) -> f64,
    lo: f64,
    hi: f64,
    rel_tol: f64,
    max_steps: usize,
) -> (f64, f64) {
    let (mut a, mut b) = (lo, hi);
    let mut c = b - RATIO * (b - a);
    let mut d = a + RATIO * (b - a);
    let (mut fc, mut fd) = (f(c), f(d));
    let width = rel_tol * (1.0 + lo.abs().max(hi.abs()));
    for _ in 0..max_steps {
        if (b - a).abs() <= width {
            break;
        }
        if fc <= fd {
            b = d;
            d = c;
            fd = fc;
            c = b - RATIO * (b - a);
            fc = f(c);
        } else {
            a = c;
            c = d;
            fc = fd;
            d = a + RATIO * (b - a);
            fd = f(d);
        }
    }
    let inner = if fc <= fd { (c, fc) } else { (d, fd) };
    [(lo, f(lo)), (hi, f(hi)), inner]
        .into_iter()
        .filter(|p| !p.1.is_nan())
        .min_by(|p, q| p.1.total_cmp(&q.1))
        .unwrap_or(inner)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn finds_the_minimum_of_a_parabola_and_respects_the_ends() {
        let (x, fx) = golden_minimum(|x| (x - 1.3).powi(2) + 2.0, -4.0, 10.0, 1e-12, 200);
        assert!(
            (x - 1.3).abs() < 1e-6 && (fx - 2.0).abs() < 1e-12,
            "{x} {fx}"
        );
        // A minimum beyond the interval: the nearer end.
        let (x, _) = golden_minimum(|x| (x - 20.0).powi(2), 0.0, 5.0, 1e-12, 200);
        assert!((x - 5.0).abs() < 1e-15, "{x}");
    }
}
