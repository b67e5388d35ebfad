//! Units of suction and water content, and the column names that carry them.
//!
//! Inside the program suction is a head `h` in cm of water (positive when drier) and water
//! content a volumetric fraction (m3/m3). Files say their unit in the column name
//! (`suction_kpa`, `theta_pct`, ...); this module maps those names to conversions.

use std::fmt;
use std::str::FromStr;

use serde::{Deserialize, Serialize};

mod conductivity;
mod exact;

pub use conductivity::ConductivityUnit;

/// Standard gravity in m/s2 (CGPM 1901), which fixes 1 cm of water = 98.0665 Pa.
pub const STANDARD_GRAVITY: f64 = 9.806_65;

/// cm of water head per kPa: 1000 / 98.0665 (conventional water density and standard gravity).
pub const CM_PER_KPA: f64 = 1000.0 / 98.0665;

/// cm of water head per hPa (= per mbar).
pub const CM_PER_HPA: f64 = CM_PER_KPA / 10.0;

/// cm of water head per bar (100 kPa).
pub const CM_PER_BAR: f64 = CM_PER_KPA * 100.0;

/// cm of water head per MPa (1000 kPa).
pub const CM_PER_MPA: f64 = CM_PER_KPA * 1000.0;

/// Density of water used to turn gravimetric into volumetric water content, g/cm3 (common practice).
pub const WATER_DENSITY_G_CM3: f64 = 1.0;

/// Particle density of mineral soil, g/cm3 (common practice), for porosity from bulk density.
pub const PARTICLE_DENSITY_G_CM3: f64 = 2.65;

/// A unit in which suction is written in a file or shown on screen.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize, Default)]
#[serde(rename_all = "lowercase")]
pub enum SuctionUnit {
    /// Centimetres of water head (canonical).
    #[default]
    Cm,
    /// Hectopascal (= millibar).
    Hpa,
    /// Kilopascal.
    Kpa,
    /// Megapascal.
    Mpa,
    /// Bar (100 kPa).
    Bar,
    /// pF = log10(h / cm).
    Pf,
}

impl SuctionUnit {
    /// Every unit, in the order the column suffixes are listed in messages.
    pub const ALL: [SuctionUnit; 6] = [
        SuctionUnit::Cm,
        SuctionUnit::Hpa,
        SuctionUnit::Kpa,
        SuctionUnit::Mpa,
        SuctionUnit::Bar,
        SuctionUnit::Pf,
    ];

    /// The lower-case label used in column names and on screen (`cm`, `kpa`, `pf`, ...).
    pub fn label(self) -> &'static str {
        match self {
            SuctionUnit::Cm => "cm",
            SuctionUnit::Hpa => "hpa",
            SuctionUnit::Kpa => "kpa",
            SuctionUnit::Mpa => "mpa",
            SuctionUnit::Bar => "bar",
            SuctionUnit::Pf => "pf",
        }
    }

    /// The conventional display symbol (`cm`, `hPa`, `kPa`, `MPa`, `bar`, `pF`).
    pub fn symbol(self) -> &'static str {
        match self {
            SuctionUnit::Cm => "cm",
            SuctionUnit::Hpa => "hPa",
            SuctionUnit::Kpa => "kPa",
            SuctionUnit::Mpa => "MPa",
            SuctionUnit::Bar => "bar",
            SuctionUnit::Pf => "pF",
        }
    }

    /// The column name a file uses for suction in this unit (`suction_kpa`, or `pf`).
    pub fn column_name(self) -> &'static str {
        match self {
            SuctionUnit::Cm => "suction_cm",
            SuctionUnit::Hpa => "suction_hpa",
            SuctionUnit::Kpa => "suction_kpa",
            SuctionUnit::Mpa => "suction_mpa",
            SuctionUnit::Bar => "suction_bar",
            SuctionUnit::Pf => "pf",
        }
    }

    /// Convert a value written in this unit to suction head in cm.
    ///
    /// pF is logarithmic, so `to_cm(pF 2) = 100 cm`. The result can be negative for a negative
    /// input (a pressure); callers decide whether that is allowed.
    pub fn to_cm(self, value: f64) -> f64 {
        match self {
            SuctionUnit::Cm => value,
            SuctionUnit::Hpa => value * CM_PER_HPA,
            SuctionUnit::Kpa => value * CM_PER_KPA,
            SuctionUnit::Mpa => value * CM_PER_MPA,
            SuctionUnit::Bar => value * CM_PER_BAR,
            SuctionUnit::Pf => 10f64.powf(value),
        }
    }

    /// The suction in cm that a decimal written in this unit stands for, rounded once to the
    /// nearest double (see `units/exact.rs`): what imports store. In pF, `-inf` (any case)
    /// is saturation, 0 cm. `None` when the text is not a decimal number or the value is not
    /// finite in cm; the sign is the caller's to check.
    pub fn decimal_to_cm(self, text: &str) -> Option<f64> {
        exact::decimal_to_cm(self, text)
    }

    /// The shortest decimal in this unit that [`Self::decimal_to_cm`] turns back into exactly
    /// `h_cm` (`-inf` for 0 cm in pF), so a listing imports to the very values it lists.
    /// `None` for a value that is not finite, or negative in pF.
    pub fn cm_to_decimal(self, h_cm: f64) -> Option<String> {
        exact::cm_to_decimal(self, h_cm)
    }

    /// Convert a suction head in cm to this unit (pF of 0 cm is minus infinity).
    pub fn from_cm(self, h_cm: f64) -> f64 {
        match self {
            SuctionUnit::Cm => h_cm,
            SuctionUnit::Hpa => h_cm / CM_PER_HPA,
            SuctionUnit::Kpa => h_cm / CM_PER_KPA,
            SuctionUnit::Mpa => h_cm / CM_PER_MPA,
            SuctionUnit::Bar => h_cm / CM_PER_BAR,
            SuctionUnit::Pf => h_cm.log10(),
        }
    }

    /// Recognise a suction column name (`suction_<unit>` or `pf`), case-insensitive.
    ///
    /// Returns `None` for a name that is not a suction column at all, and
    /// `Some(Err(suffix))` for `suction_<something unknown>`, so the caller can report the bad suffix.
    pub fn from_column(name: &str) -> Option<Result<SuctionUnit, String>> {
        let lower = name.trim().to_ascii_lowercase();
        if lower == "pf" {
            return Some(Ok(SuctionUnit::Pf));
        }
        let suffix = lower.strip_prefix("suction_")?;
        Some(suffix.parse().map_err(|_| suffix.to_string()))
    }
}

impl fmt::Display for SuctionUnit {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.symbol())
    }
}

impl FromStr for SuctionUnit {
    type Err = String;

    fn from_str(s: &str) -> Result<Self, Self::Err> {
        match s.trim().to_ascii_lowercase().as_str() {
            "cm" => Ok(SuctionUnit::Cm),
            "hpa" | "mbar" => Ok(SuctionUnit::Hpa),
            "kpa" => Ok(SuctionUnit::Kpa),
            "mpa" => Ok(SuctionUnit::Mpa),
            "bar" => Ok(SuctionUnit::Bar),
            "pf" => Ok(SuctionUnit::Pf),
            other => Err(format!(
                "unknown suction unit {other:?}, expected one of cm, hpa, kpa, mpa, bar, pf"
            )),
        }
    }
}

/// How a file states water content.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum WaterUnit {
    /// Volumetric fraction, m3/m3 (column `theta`).
    Fraction,
    /// Volumetric percent (column `theta_pct`).
    Percent,
    /// Gravimetric, g water per g dry soil (column `water_g_per_g`); needs a bulk density.
    Gravimetric,
}

impl WaterUnit {
    /// The column name a file uses for water content in this unit.
    pub fn column_name(self) -> &'static str {
        match self {
            WaterUnit::Fraction => "theta",
            WaterUnit::Percent => "theta_pct",
            WaterUnit::Gravimetric => "water_g_per_g",
        }
    }

    /// Recognise a water-content column name, case-insensitive.
    ///
    /// `None` for a name that is not a water-content column; `Some(Err(suffix))` for
    /// `theta_<unknown>`.
    pub fn from_column(name: &str) -> Option<Result<WaterUnit, String>> {
        let lower = name.trim().to_ascii_lowercase();
        match lower.as_str() {
            "theta" | "theta_m3_m3" => Some(Ok(WaterUnit::Fraction)),
            "theta_pct" | "theta_percent" => Some(Ok(WaterUnit::Percent)),
            "water_g_per_g" => Some(Ok(WaterUnit::Gravimetric)),
            _ => lower
                .strip_prefix("theta_")
                .map(|suffix| Err(suffix.to_string())),
        }
    }

    /// The largest value a reading in this unit can take (1 for a fraction, 100 for percent).
    ///
    /// Gravimetric water content has no fixed bound (peat holds several g/g); `None` then.
    pub fn max_value(self) -> Option<f64> {
        match self {
            WaterUnit::Fraction => Some(1.0),
            WaterUnit::Percent => Some(100.0),
            WaterUnit::Gravimetric => None,
        }
    }

    /// Convert a value in this unit to a volumetric fraction.
    ///
    /// `bulk_density_g_cm3` is used only for gravimetric input: theta = w * rho_b / rho_w.
    /// Returns `None` when gravimetric input has no bulk density.
    pub fn to_fraction(self, value: f64, bulk_density_g_cm3: Option<f64>) -> Option<f64> {
        match self {
            WaterUnit::Fraction => Some(value),
            WaterUnit::Percent => Some(value / 100.0),
            WaterUnit::Gravimetric => {
                bulk_density_g_cm3.map(|rho_b| value * rho_b / WATER_DENSITY_G_CM3)
            }
        }
    }
}

/// Porosity from dry bulk density with the common-practice particle density of 2.65 g/cm3.
pub fn porosity_from_bulk_density(bulk_density_g_cm3: f64) -> f64 {
    1.0 - bulk_density_g_cm3 / PARTICLE_DENSITY_G_CM3
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn column_names_round_trip() {
        for unit in SuctionUnit::ALL {
            assert_eq!(SuctionUnit::from_column(unit.column_name()), Some(Ok(unit)));
        }
        assert_eq!(
            SuctionUnit::from_column("suction_psi"),
            Some(Err("psi".to_string()))
        );
        assert_eq!(SuctionUnit::from_column("theta"), None);
        assert_eq!(
            WaterUnit::from_column("THETA_PCT"),
            Some(Ok(WaterUnit::Percent))
        );
        assert_eq!(
            WaterUnit::from_column("theta_vol"),
            Some(Err("vol".to_string()))
        );
        assert_eq!(WaterUnit::from_column("sample"), None);
    }

    #[test]
    fn to_and_from_cm_are_inverse() {
        for unit in SuctionUnit::ALL {
            for h in [0.5, 10.0, 336.5, 15_000.0] {
                let back = unit.to_cm(unit.from_cm(h));
                assert!((back - h).abs() <= 1e-12 * h, "{unit:?} {h} -> {back}");
            }
        }
    }

    #[test]
    fn gravimetric_needs_bulk_density() {
        assert_eq!(WaterUnit::Gravimetric.to_fraction(0.2, None), None);
        let theta = WaterUnit::Gravimetric
            .to_fraction(0.2, Some(1.5))
            .expect("bulk density given");
        assert!((theta - 0.3).abs() < 1e-15);
    }
}
