//! Units of hydraulic conductivity and the column names that carry them.
//!
//! Inside the program conductivity is in cm/day. Files say their unit in the column name:
//! `conductivity_cm_per_day`, `conductivity_cm_per_h`, `conductivity_mm_per_h`,
//! `conductivity_m_per_s` for measured K, and the same suffixes after `ks_` for a core's
//! saturated conductivity.

use std::fmt;

/// Seconds in a day.
const SECONDS_PER_DAY: f64 = 86_400.0;

/// A unit of hydraulic conductivity (a velocity).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum ConductivityUnit {
    /// cm/day, porewise's own.
    CmPerDay,
    /// cm/h.
    CmPerHour,
    /// mm/h.
    MmPerHour,
    /// m/s.
    MPerSecond,
}

impl ConductivityUnit {
    /// Every unit, in the order messages list them.
    pub const ALL: [ConductivityUnit; 4] = [
        ConductivityUnit::CmPerDay,
        ConductivityUnit::CmPerHour,
        ConductivityUnit::MmPerHour,
        ConductivityUnit::MPerSecond,
    ];

    /// The suffix after `conductivity_` or `ks_` in a column name.
    pub fn suffix(self) -> &'static str {
        match self {
            ConductivityUnit::CmPerDay => "cm_per_day",
            ConductivityUnit::CmPerHour => "cm_per_h",
            ConductivityUnit::MmPerHour => "mm_per_h",
            ConductivityUnit::MPerSecond => "m_per_s",
        }
    }

    /// The unit as people write it (`cm/day`).
    pub fn symbol(self) -> &'static str {
        match self {
            ConductivityUnit::CmPerDay => "cm/day",
            ConductivityUnit::CmPerHour => "cm/h",
            ConductivityUnit::MmPerHour => "mm/h",
            ConductivityUnit::MPerSecond => "m/s",
        }
    }

    /// cm/day per one of this unit.
    pub fn cm_per_day(self) -> f64 {
        match self {
            ConductivityUnit::CmPerDay => 1.0,
            ConductivityUnit::CmPerHour => 24.0,
            ConductivityUnit::MmPerHour => 2.4,
            ConductivityUnit::MPerSecond => 100.0 * SECONDS_PER_DAY,
        }
    }

    /// A value in this unit as cm/day.
    pub fn to_cm_per_day(self, value: f64) -> f64 {
        value * self.cm_per_day()
    }

    /// A value in cm/day in this unit.
    pub fn from_cm_per_day(self, value: f64) -> f64 {
        value / self.cm_per_day()
    }

    /// Recognise a column `<prefix>_<unit>` (case-insensitive): `None` when the name does
    /// not start with `<prefix>_`, `Some(Err(suffix))` for an unknown unit.
    pub fn from_column(prefix: &str, name: &str) -> Option<Result<ConductivityUnit, String>> {
        let lower = name.trim().to_ascii_lowercase();
        let suffix = lower.strip_prefix(prefix)?.strip_prefix('_')?;
        Some(
            Self::ALL
                .into_iter()
                .find(|u| u.suffix() == suffix)
                .ok_or_else(|| suffix.to_string()),
        )
    }

    /// The column name `<prefix>_<unit>`.
    pub fn column_name(self, prefix: &str) -> String {
        format!("{prefix}_{}", self.suffix())
    }

    /// Recognise a unit as written on the command line (`cm/day`, `cm_per_day`, `m/s`, ...).
    ///
    /// # Errors
    /// A message naming the units known.
    pub fn parse(text: &str) -> Result<ConductivityUnit, String> {
        let t = text.trim().to_ascii_lowercase();
        Self::ALL
            .into_iter()
            .find(|u| u.suffix() == t || u.symbol() == t)
            .ok_or_else(|| {
                format!("unknown conductivity unit {text:?}, expected cm/day, cm/h, mm/h or m/s")
            })
    }
}

impl fmt::Display for ConductivityUnit {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.symbol())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn columns_and_conversions() {
        for unit in ConductivityUnit::ALL {
            let name = unit.column_name("conductivity");
            assert_eq!(
                ConductivityUnit::from_column("conductivity", &name),
                Some(Ok(unit))
            );
            assert_eq!(ConductivityUnit::parse(unit.symbol()), Ok(unit));
            let back = unit.from_cm_per_day(unit.to_cm_per_day(3.7));
            assert!((back - 3.7).abs() < 1e-12, "{unit}");
        }
        assert_eq!(
            ConductivityUnit::from_column("ks", "KS_MM_PER_H"),
            Some(Ok(ConductivityUnit::MmPerHour))
        );
        assert_eq!(
            ConductivityUnit::from_column("conductivity", "conductivity_in_per_h"),
            Some(Err("in_per_h".to_string()))
        );
        assert_eq!(ConductivityUnit::from_column("ks", "ksat"), None);
        // 1 m/s = 100 cm x 86 400 s/day (definition of the units).
        assert!((ConductivityUnit::MPerSecond.to_cm_per_day(1e-6) - 8.64).abs() < 1e-12);
        // 1 mm/h = 0.1 cm x 24 h/day.
        assert!((ConductivityUnit::MmPerHour.to_cm_per_day(10.0) - 24.0).abs() < 1e-12);
    }
}
