//! Suction conversions that round once: a decimal written in any unit becomes the double
//! nearest the exact value in cm, and a stored suction is written back as the shortest
//! decimal that converts to that very double.
//!
//! A plain `value * (1000 / 98.0665)` rounds twice (the factor, then the product) and cannot
//! reach about a fifth of the doubles at all, so no decimal in kPa would bring some stored
//! suctions back; pF (10^x) skips most of them. Here the arithmetic is double-double (about
//! 32 significant digits, Dekker 1971; the algorithms of Hida, Li & Bailey's QD library): the
//! written decimal is read exactly to that precision, converted, and rounded to a double once.
//! The unit factors are exact ratios of integers (1 cm of water = 98.0665 Pa, standard
//! gravity, CGPM 1901).

use super::SuctionUnit;

/// A value as an unevaluated sum hi + lo with |lo| <= ulp(hi) / 2.
#[derive(Debug, Clone, Copy, PartialEq)]
struct Dd {
    hi: f64,
    lo: f64,
}

/// ln 2 as a double-double (mpmath 1.3.0, 60 digits: 0.69314718055994530941723212145817657).
const LN2: Dd = Dd {
    hi: std::f64::consts::LN_2,
    lo: 2.319_046_813_846_299_6e-17,
};

/// ln 10 as a double-double (mpmath 1.3.0, 60 digits: 2.3025850929940456840179914546843642).
const LN10: Dd = Dd {
    hi: std::f64::consts::LN_10,
    lo: -2.170_756_223_382_249_4e-16,
};

/// s = a + b exactly as s + e (Knuth's two-sum).
fn two_sum(a: f64, b: f64) -> Dd {
    let s = a + b;
    let bb = s - a;
    Dd {
        hi: s,
        lo: (a - (s - bb)) + (b - bb),
    }
}

/// s = a + b exactly when |a| >= |b|.
fn quick_two_sum(a: f64, b: f64) -> Dd {
    let s = a + b;
    Dd {
        hi: s,
        lo: b - (s - a),
    }
}

/// p = a b exactly as p + e (the fused multiply-add gives the error).
fn two_prod(a: f64, b: f64) -> Dd {
    let p = a * b;
    Dd {
        hi: p,
        lo: a.mul_add(b, -p),
    }
}

impl Dd {
    fn from(v: f64) -> Dd {
        Dd { hi: v, lo: 0.0 }
    }

    fn add(self, y: Dd) -> Dd {
        let s = two_sum(self.hi, y.hi);
        let t = two_sum(self.lo, y.lo);
        let s = quick_two_sum(s.hi, s.lo + t.hi);
        quick_two_sum(s.hi, s.lo + t.lo)
    }

    fn neg(self) -> Dd {
        Dd {
            hi: -self.hi,
            lo: -self.lo,
        }
    }

    fn sub(self, y: Dd) -> Dd {
        self.add(y.neg())
    }

    fn mul(self, y: Dd) -> Dd {
        let p = two_prod(self.hi, y.hi);
        quick_two_sum(p.hi, p.lo + (self.hi * y.lo + self.lo * y.hi))
    }

    fn div(self, y: Dd) -> Dd {
        let q1 = self.hi / y.hi;
        let r = self.sub(y.mul(Dd::from(q1)));
        let q2 = r.hi / y.hi;
        let r = r.sub(y.mul(Dd::from(q2)));
        let q3 = r.hi / y.hi;
        quick_two_sum(q1, q2).add(Dd::from(q3))
    }

    /// Times 2^k, exactly.
    fn ldexp(self, k: i32) -> Dd {
        let f = 2f64.powi(k);
        Dd {
            hi: self.hi * f,
            lo: self.lo * f,
        }
    }

    /// The double nearest the value (hi, the pair being normalised).
    fn value(self) -> f64 {
        self.hi + self.lo
    }
}

/// 10^e as a double-double: exact for 0 <= e <= 22, then products of such powers.
fn pow10(e: i32) -> Dd {
    let mut left = e.unsigned_abs();
    let mut acc = Dd::from(1.0);
    while left > 0 {
        let step = left.min(22);
        acc = acc.mul(Dd::from(10f64.powi(step as i32)));
        left -= step;
    }
    if e < 0 { Dd::from(1.0).div(acc) } else { acc }
}

/// e^x as a double-double for |x| below about 700: x = k ln 2 + r, e^(r / 512) by its Taylor
/// series, squared nine times.
fn exp(x: Dd) -> Dd {
    let k = (x.hi / LN2.hi).round();
    let r = x.sub(LN2.mul(Dd::from(k))).ldexp(-9);
    // e^r - 1 = r + r^2/2! + ...; |r| < 7e-4, so 12 terms are far below 1e-33.
    let mut term = r;
    let mut sum = r;
    for n in 2..=12 {
        term = term.mul(r).div(Dd::from(f64::from(n)));
        sum = sum.add(term);
    }
    // (1 + s)^2 - 1 = 2s + s^2, keeping the small part separate from the 1.
    for _ in 0..9 {
        sum = sum.ldexp(1).add(sum.mul(sum));
    }
    Dd::from(1.0).add(sum).ldexp(k as i32)
}

/// cm of water per unit as a double-double, from exact integers: 1 kPa = 10^7 / 980665 cm.
fn cm_per(unit: SuctionUnit) -> Dd {
    let pascal = match unit {
        SuctionUnit::Hpa => 100.0,
        SuctionUnit::Kpa => 1e3,
        SuctionUnit::Bar => 1e5,
        SuctionUnit::Mpa => 1e6,
        SuctionUnit::Cm | SuctionUnit::Pf => return Dd::from(1.0),
    };
    // pascal / 98.0665 = pascal 10^4 / 980665, both exact doubles.
    Dd::from(pascal * 1e4).div(Dd::from(980_665.0))
}

/// A decimal number (`-12.5`, `3.3e2`, `.5`) read as a double-double: its significant digits
/// (up to 36, more cannot matter at this precision) as an integer times a power of ten.
fn parse_decimal(text: &str) -> Option<Dd> {
    let t = text.trim();
    let (negative, t) = match t.as_bytes().first()? {
        b'-' => (true, &t[1..]),
        b'+' => (false, &t[1..]),
        _ => (false, t),
    };
    let (mantissa, exponent) = match t.find(['e', 'E']) {
        Some(i) => (&t[..i], t[i + 1..].parse::<i32>().ok()?),
        None => (t, 0),
    };
    let (int, frac) = mantissa.split_once('.').unwrap_or((mantissa, ""));
    if int.is_empty() && frac.is_empty() {
        return None;
    }
    let mut digits: u128 = 0;
    let mut kept = 0;
    let mut scale = exponent;
    for (c, fractional) in int
        .chars()
        .map(|c| (c, false))
        .chain(frac.chars().map(|c| (c, true)))
    {
        let d = c.to_digit(10)?;
        if kept < 36 {
            if digits > 0 || d > 0 {
                kept += 1;
            }
            digits = digits * 10 + u128::from(d);
            if fractional {
                scale -= 1;
            }
        } else if !fractional {
            scale += 1;
        }
    }
    // digits < 10^36 < 2^120: hi is its nearest double, lo the rest (exact to 2^-53 of it).
    let hi = digits as f64;
    let lo = (digits as i128 - hi as i128) as f64;
    let v = quick_two_sum(hi, lo).mul(pow10(scale));
    let v = if negative { v.neg() } else { v };
    v.value().is_finite().then_some(v)
}

/// `v` (finite, not 0) with `digits` significant digits, in plain notation where that is short.
fn format_decimal(v: Dd, digits: usize) -> String {
    let negative = v.hi < 0.0;
    let v = if negative { v.neg() } else { v };
    let mut e10 = v.hi.log10().floor() as i32;
    let p = digits as i32;
    // w = v 10^(p - 1 - e10), about 10^(p - 1) to 10^p: its integer part holds the digits.
    let w = v.mul(pow10(p - 1 - e10));
    // Round half up: the integer part of hi, then what hi's fraction and lo add.
    let floor = w.hi.floor();
    let frac = (w.hi - floor) + w.lo;
    let carry = frac.floor();
    let mut n = floor as i128 + carry as i128 + i128::from(frac - carry >= 0.5);
    let top = 10i128.pow(p as u32);
    if n >= top {
        n /= 10;
        e10 += 1;
    } else if n < top / 10 {
        n *= 10;
        e10 -= 1;
    }
    let text = n.to_string();
    let text = text.trim_end_matches('0');
    let text = if text.is_empty() { "0" } else { text };
    let sign = if negative { "-" } else { "" };
    let len = text.len() as i32;
    if (-7..21).contains(&e10) {
        if e10 < 0 {
            format!("{sign}0.{}{text}", "0".repeat((-e10 - 1) as usize))
        } else if e10 + 1 >= len {
            format!("{sign}{text}{}", "0".repeat((e10 + 1 - len) as usize))
        } else {
            let (a, b) = text.split_at((e10 + 1) as usize);
            format!("{sign}{a}.{b}")
        }
    } else if len == 1 {
        format!("{sign}{text}e{e10}")
    } else {
        let (a, b) = text.split_at(1);
        format!("{sign}{a}.{b}e{e10}")
    }
}

/// The suction in cm that `text` (a decimal in `unit`) stands for, rounded once.
///
/// In pF, `-inf` (any case) is saturation, 0 cm: log10(0) is minus infinity. `None` for text
/// that is not a decimal number, and for a value that is not finite in cm.
pub(super) fn decimal_to_cm(unit: SuctionUnit, text: &str) -> Option<f64> {
    let t = text.trim();
    if unit == SuctionUnit::Pf && t.eq_ignore_ascii_case("-inf") {
        return Some(0.0);
    }
    if unit == SuctionUnit::Cm {
        // The standard parser already rounds a decimal correctly to the nearest double.
        return t.parse::<f64>().ok().filter(|v| v.is_finite());
    }
    let v = parse_decimal(t)?;
    let h = match unit {
        SuctionUnit::Pf => {
            if v.hi > 308.0 {
                return None;
            }
            exp(v.mul(LN10)).value()
        }
        _ => v.mul(cm_per(unit)).value(),
    };
    h.is_finite().then_some(h)
}

/// The shortest decimal in `unit` that [`decimal_to_cm`] turns back into exactly `h_cm`
/// (`-inf` for 0 cm in pF). `None` for a suction that is negative in pF or not finite.
pub(super) fn cm_to_decimal(unit: SuctionUnit, h_cm: f64) -> Option<String> {
    if !h_cm.is_finite() {
        return None;
    }
    if unit == SuctionUnit::Cm {
        return Some(shortest(h_cm));
    }
    if h_cm == 0.0 {
        return Some(if unit == SuctionUnit::Pf { "-inf" } else { "0" }.to_string());
    }
    let target = match unit {
        SuctionUnit::Pf => {
            if h_cm < 0.0 {
                return None;
            }
            log10(h_cm)
        }
        _ => Dd::from(h_cm).div(cm_per(unit)),
    };
    if target.hi == 0.0 {
        return Some("0".to_string());
    }
    // 21 significant digits put the decimal within 5e-21 of the exact value: far inside the
    // half unit in the last place (1.1e-16) that rounding back to h_cm allows. Only beyond
    // the range of double-double arithmetic (below about 1e-290 cm, not a suction anyone
    // measures) can that fail; the plain conversion is written then.
    (1..=21)
        .map(|digits| format_decimal(target, digits))
        .find(|text| decimal_to_cm(unit, text) == Some(h_cm))
        .or_else(|| Some(shortest(unit.from_cm(h_cm))))
}

/// log10(h) as a double-double: the double's log10 and one Newton step on 10^y = h.
fn log10(h: f64) -> Dd {
    let y0 = Dd::from(h.log10());
    let p = exp(y0.mul(LN10));
    // y1 = y0 + (h - 10^y0) / (10^y0 ln 10): the correction needs only double precision.
    let correction = Dd::from(h).sub(p).value() / (p.value() * LN10.hi);
    y0.add(Dd::from(correction))
}

/// The shortest decimal that reads back as exactly `v` (Rust's formatting guarantees it).
fn shortest(v: f64) -> String {
    let a = v.abs();
    if a == 0.0 || (1e-7..1e21).contains(&a) {
        format!("{v}")
    } else {
        format!("{v:e}")
    }
}

#[cfg(test)]
#[allow(
    clippy::float_cmp,
    clippy::unreadable_literal,
    clippy::excessive_precision
)]
mod tests {
    use super::*;

    #[test]
    fn constants_are_their_forty_digit_decimals() {
        // The decimals from mpmath 1.3.0 (60 digits), read by the parser under test.
        let ln2 = parse_decimal("0.6931471805599453094172321214581765680755").expect("ln 2");
        assert_eq!(ln2.hi, LN2.hi);
        assert!((ln2.sub(LN2).value() / LN2.hi).abs() < 1e-31, "{ln2:?}");
        let ln10 = parse_decimal("2.302585092994045684017991454684364207601").expect("ln 10");
        assert_eq!(ln10.hi, LN10.hi);
        assert!((ln10.sub(LN10).value() / LN10.hi).abs() < 1e-31, "{ln10:?}");
    }

    #[test]
    fn exp_and_the_unit_factors_hold_about_32_digits() {
        // mpmath 1.3.0, 50 digits (tests/data/high_precision.py): e^1, 10^7 / 980665 and
        // 10^x for x the double nearest 2.526993264 (the pF of 33 kPa).
        let e = exp(Dd::from(1.0));
        let want = parse_decimal("2.7182818284590452353602874713526624977572470937").expect("e");
        assert!((e.sub(want).value() / want.hi).abs() < 1e-30, "{e:?}");
        let kpa = cm_per(SuctionUnit::Kpa);
        let want = parse_decimal("10.19716212977928242570092743189570342573661749935")
            .expect("cm per kPa");
        assert!((kpa.sub(want).value() / want.hi).abs() < 1e-30, "{kpa:?}");
        let pf = exp(Dd::from(2.526993264).mul(LN10));
        let want = parse_decimal("336.50635004978664432094271364429366536256217063029")
            .expect("10^2.526993264");
        assert!((pf.sub(want).value() / want.hi).abs() < 1e-29, "{pf:?}");
    }

    #[test]
    fn decimals_parse_in_every_notation() {
        for (text, want) in [
            ("12.5", 12.5),
            ("-3", -3.0),
            (".5", 0.5),
            ("5.", 5.0),
            ("+1e3", 1000.0),
            ("2.5E-3", 0.0025),
            (
                "0.000000000000000000000000000000000000000000001234",
                1.234e-45,
            ),
            (
                "123456789012345678901234567890123456789012",
                1.2345678901234568e41,
            ),
        ] {
            assert_eq!(parse_decimal(text).map(Dd::value), Some(want), "{text}");
        }
        for bad in ["", ".", "-", "1e", "e5", "1.2.3", "12a"] {
            assert_eq!(parse_decimal(bad), None, "{bad}");
        }
    }

    #[test]
    fn formatting_gives_the_digits_asked_for() {
        let third = Dd::from(1.0).div(Dd::from(3.0));
        assert_eq!(format_decimal(third, 5), "0.33333");
        assert_eq!(format_decimal(third, 21), "0.333333333333333333333");
        assert_eq!(format_decimal(Dd::from(336.5), 3), "337");
        assert_eq!(format_decimal(Dd::from(999.96), 4), "1000");
        assert_eq!(format_decimal(Dd::from(-0.0025), 2), "-0.0025");
        assert_eq!(format_decimal(Dd::from(1.5e-9), 2), "1.5e-9");
        assert_eq!(format_decimal(Dd::from(2.0e22), 2), "2e22");
    }

    #[test]
    fn ordinary_lab_values_convert_as_written() {
        // 33 kPa = 336.5063503 cm (reference notes, table T10): the double nearest the exact
        // 33 10^7 / 980665, and written back as "33".
        let h = decimal_to_cm(SuctionUnit::Kpa, "33").expect("h");
        assert!((h / 336.5063503 - 1.0).abs() < 1e-9);
        assert_eq!(cm_to_decimal(SuctionUnit::Kpa, h).as_deref(), Some("33"));
        assert_eq!(decimal_to_cm(SuctionUnit::Pf, "2"), Some(100.0));
        assert_eq!(cm_to_decimal(SuctionUnit::Pf, 100.0).as_deref(), Some("2"));
        assert_eq!(cm_to_decimal(SuctionUnit::Pf, 1.0).as_deref(), Some("0"));
        assert_eq!(decimal_to_cm(SuctionUnit::Pf, "-INF"), Some(0.0));
        assert_eq!(cm_to_decimal(SuctionUnit::Pf, 0.0).as_deref(), Some("-inf"));
        assert_eq!(decimal_to_cm(SuctionUnit::Kpa, "-inf"), None);
        assert_eq!(cm_to_decimal(SuctionUnit::Hpa, 0.0).as_deref(), Some("0"));
        assert_eq!(cm_to_decimal(SuctionUnit::Pf, -1.0), None);
        assert_eq!(decimal_to_cm(SuctionUnit::Pf, "400"), None);
    }

    #[test]
    fn every_double_comes_back_through_every_unit() {
        // Seeded doubles over the range of suctions (1e-3 to 1.02e7 cm), plus awkward ones.
        use rand::{Rng, SeedableRng};
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(12);
        let mut values: Vec<f64> = (0..4000)
            .map(|_| 10f64.powf(rng.random_range(-3.0..7.0085)))
            .collect();
        values.extend([
            1.0,
            336.5063503,
            10_197_162.129_779_281,
            1e-3 + f64::EPSILON,
            0.1 + 0.2,
            1e-250,
            1e250,
        ]);
        for unit in SuctionUnit::ALL {
            for &h in &values {
                let text = cm_to_decimal(unit, h)
                    .unwrap_or_else(|| panic!("no decimal for {h:e} in {unit}"));
                assert_eq!(
                    decimal_to_cm(unit, &text),
                    Some(h),
                    "{unit} {h:e} -> {text}"
                );
                assert!(text.len() <= 28, "{unit} {h:e} -> {text}");
            }
            // Far below any measurable suction the plain conversion is written.
            assert!(cm_to_decimal(unit, f64::MIN_POSITIVE).is_some());
        }
    }
}
