//! Tables and exports built from model and store values.

pub mod campaign;
pub mod curve_table;
pub mod table;

pub use table::{Cell, Column, Listing};

/// Format a number for a CSV cell: the shortest text that reads back to the same f64, in
/// exponent notation below 1e-4 and from 1e15 on (so 1e-300 is not written with 300 zeros).
///
/// Callers pass finite values only; NaN or infinity become an empty cell before this.
pub fn format_number(v: f64) -> String {
    let a = v.abs();
    if a == 0.0 || (1e-4..1e15).contains(&a) {
        format!("{v}")
    } else {
        format!("{v:e}")
    }
}

#[cfg(test)]
#[allow(clippy::unreadable_literal)]
mod tests {
    use super::format_number;

    #[test]
    fn numbers_read_back_exactly() {
        for v in [
            0.0,
            1.0,
            0.2143441034,
            1.762726288e-05,
            1e-300,
            2.5e17,
            -3.25,
        ] {
            let text = format_number(v);
            assert_eq!(text.parse::<f64>().ok(), Some(v), "{text}");
            assert!(text.len() < 30, "{text}");
        }
        assert_eq!(format_number(1e-5), "1e-5");
        assert_eq!(format_number(336.5063503), "336.5063503");
    }
}
