//! Numbers for people: rounding to significant digits for messages, tables and exports.

/// Round `v` to `digits` significant digits (1..=17); non-finite values pass through.
pub fn round_significant(v: f64, digits: usize) -> f64 {
    if !v.is_finite() || v == 0.0 {
        return v;
    }
    let digits = digits.clamp(1, 17);
    format!("{:.*e}", digits - 1, v).parse().unwrap_or(v)
}

/// `v` rounded to `digits` significant digits, written in plain decimal without trailing
/// zeros (`336.5`, `0.00123`, `15000`); `None` for NaN or infinity, which are never printed.
pub fn significant(v: f64, digits: usize) -> Option<String> {
    v.is_finite().then(|| {
        let r = round_significant(v, digits);
        // -0 prints as 0.
        format!("{}", r + 0.0)
    })
}

/// Lower-case hexadecimal text of bytes (for SHA-256 digests).
pub fn hex(bytes: &[u8]) -> String {
    use std::fmt::Write as _;
    bytes
        .iter()
        .fold(String::with_capacity(2 * bytes.len()), |mut out, b| {
            let _ = write!(out, "{b:02x}");
            out
        })
}

/// `n` and the word, with an `s` unless `n` is 1 (`1 site`, `3 readings`).
pub fn plural(n: u64, word: &str) -> String {
    format!("{n} {word}{}", if n == 1 { "" } else { "s" })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn rounds_and_trims() {
        assert_eq!(significant(336.504_183_9, 6).as_deref(), Some("336.504"));
        assert_eq!(
            significant(33.000_000_000_000_01, 10).as_deref(),
            Some("33")
        );
        assert_eq!(significant(0.000_123_456_7, 3).as_deref(), Some("0.000123"));
        assert_eq!(significant(15_295.74, 4).as_deref(), Some("15300"));
        assert_eq!(significant(-0.0, 4).as_deref(), Some("0"));
        assert_eq!(significant(f64::NAN, 4), None);
        assert_eq!(significant(f64::NEG_INFINITY, 4), None);
        assert_eq!(plural(1, "site"), "1 site");
        assert_eq!(plural(0, "reading"), "0 readings");
    }
}
