//! Tables and exports built from model and store values.

pub mod advice;
pub mod campaign;
pub mod conductivity;
pub mod csv_safe;
pub mod curve_table;
pub mod export;
pub mod fit_table;
pub mod fits;
pub mod review;
pub mod table;

pub use table::{Cell, Column, Listing};

use std::io::Write;
use std::path::Path;

/// Write `bytes` to `path` atomically: a temporary file beside it, then a rename, so a
/// crash or a full disk never leaves a half-written file under the final name.
///
/// # Errors
/// Any I/O error creating, writing, syncing or renaming the temporary file (it is removed).
pub fn write_atomic(path: &Path, bytes: &[u8]) -> std::io::Result<()> {
    let dir = match path.parent() {
        Some(d) if !d.as_os_str().is_empty() => d.to_path_buf(),
        _ => std::path::PathBuf::from("."),
    };
    let name = path
        .file_name()
        .map_or_else(|| "output".into(), |n| n.to_string_lossy().into_owned());
    let tmp = dir.join(format!(".{name}.{}.tmp", std::process::id()));
    let result = (|| {
        let mut f = std::fs::File::create(&tmp)?;
        f.write_all(bytes)?;
        f.sync_all()?;
        std::fs::rename(&tmp, path)
    })();
    if result.is_err() {
        let _ = std::fs::remove_file(&tmp);
    }
    result
}

/// Format a number for a CSV cell: the shortest text that reads back to the same f64, in
/// exponent notation below 1e-4 and from 1e15 on (so 1e-300 is not written with 300 zeros).
///
/// Callers pass finite values only; NaN or infinity become an empty cell before this.
pub fn format_number(v: f64) -> String {
    if v == 0.0 {
        // Both zeros: a table never shows -0.
        return "0".to_string();
    }
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
        assert_eq!(format_number(-0.0), "0");
    }
}
