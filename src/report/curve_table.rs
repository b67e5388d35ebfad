//! The table printed by `porewise curve`: theta, Se, C(h) and optionally Kr and K per suction.

use std::io::Write;

use crate::model::conductivity::{
    ConductivityChoiceError, ConductivityForm, ConductivityModel, DEFAULT_PORE_CONNECTIVITY,
};
use crate::model::retention::{ModelKind, RetentionCurve};
use crate::model::units::SuctionUnit;

use super::format_number;

/// Column names without conductivity (DESIGN.md, curve tables).
pub const RETENTION_COLUMNS: [&str; 4] = [
    "suction_cm",
    "theta",
    "effective_saturation",
    "capacity_per_cm",
];
/// Columns added when Ks is given: Kr, K and the conductivity model they come from.
pub const CONDUCTIVITY_COLUMNS: [&str; 3] = [
    "relative_conductivity",
    "conductivity_cm_per_day",
    "conductivity_model",
];

/// What is wrong with the options of a curve table.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum CurveTableError {
    /// A suction is negative, NaN or infinite.
    #[error("suction number {position} ({value} {unit}) must be a finite number >= 0")]
    BadSuction {
        /// 1-based position in the list.
        position: usize,
        /// The value given.
        value: f64,
        /// Its unit.
        unit: SuctionUnit,
    },
    /// The list of suctions is empty.
    #[error("the list of suctions is empty")]
    NoSuctions,
    /// Ks is not a positive finite number.
    #[error("Ks = {0} cm/day must be a finite number > 0")]
    BadKs(f64),
    /// The pore-connectivity exponent is NaN or infinite.
    #[error("pore connectivity L = {0} must be a finite number")]
    BadPoreConnectivity(f64),
    /// The retention model has no closed-form conductivity, or not in the form asked for.
    #[error("{0}")]
    Conductivity(#[from] ConductivityChoiceError),
    /// A pore-connectivity exponent was given for a model that has none.
    #[error(
        "{model} pairs with {conductivity} conductivity, which has no pore-connectivity exponent"
    )]
    NoPoreConnectivity {
        /// The retention model.
        model: ModelKind,
        /// Its conductivity model's name.
        conductivity: &'static str,
    },
}

/// The conductivity model, Ks and Mualem's L for the conductivity columns, checked against
/// the retention model.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ConductivitySpec {
    /// The conductivity model (named in the table beside its values).
    pub model: ConductivityModel,
    /// Saturated conductivity, cm/day.
    pub ks_cm_per_day: f64,
    /// Mualem's pore-connectivity exponent L.
    pub pore_connectivity: f64,
}

impl ConductivitySpec {
    /// Check Ks (> 0), L (finite; only for Mualem forms; 0.5 when not given) and the form
    /// asked for (`None`: the model's usual pairing) for `kind`.
    ///
    /// # Errors
    /// A [`CurveTableError`] naming the problem.
    pub fn new(
        kind: ModelKind,
        ks_cm_per_day: f64,
        pore_connectivity: Option<f64>,
        form: Option<ConductivityForm>,
    ) -> Result<ConductivitySpec, CurveTableError> {
        let model = ConductivityModel::select(kind, form)?;
        if !(ks_cm_per_day.is_finite() && ks_cm_per_day > 0.0) {
            return Err(CurveTableError::BadKs(ks_cm_per_day));
        }
        if let Some(l) = pore_connectivity {
            if !l.is_finite() {
                return Err(CurveTableError::BadPoreConnectivity(l));
            }
            if !model.uses_pore_connectivity() {
                return Err(CurveTableError::NoPoreConnectivity {
                    model: kind,
                    conductivity: model.display_name(),
                });
            }
        }
        Ok(ConductivitySpec {
            model,
            ks_cm_per_day,
            pore_connectivity: pore_connectivity.unwrap_or(DEFAULT_PORE_CONNECTIVITY),
        })
    }
}

/// Suctions to tabulate when none are given: five per decade from 1 cm to 10^6 cm.
pub fn default_suctions_cm() -> Vec<f64> {
    (0..=30).map(|k| 10f64.powf(f64::from(k) / 5.0)).collect()
}

/// Check a list of suctions written in `unit` and convert it to cm.
///
/// # Errors
/// [`CurveTableError::BadSuction`] for the first value that is negative or not finite, and
/// [`CurveTableError::NoSuctions`] for an empty list.
pub fn suctions_to_cm(values: &[f64], unit: SuctionUnit) -> Result<Vec<f64>, CurveTableError> {
    if values.is_empty() {
        return Err(CurveTableError::NoSuctions);
    }
    values
        .iter()
        .enumerate()
        .map(|(i, &value)| {
            let h = unit.to_cm(value);
            if value.is_finite() && h.is_finite() && h >= 0.0 {
                Ok(h)
            } else {
                Err(CurveTableError::BadSuction {
                    position: i + 1,
                    value,
                    unit,
                })
            }
        })
        .collect()
}

/// One row of the table; `None` is an empty cell.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct CurveRow {
    /// Suction, cm.
    pub suction_cm: f64,
    /// Water content, m3/m3.
    pub theta: f64,
    /// Effective saturation.
    pub effective_saturation: f64,
    /// C(h) = -d theta / dh per cm (empty at a break point).
    pub capacity_per_cm: Option<f64>,
    /// Kr (empty without Ks).
    pub relative_conductivity: Option<f64>,
    /// K, cm/day (empty without Ks).
    pub conductivity_cm_per_day: Option<f64>,
}

/// Evaluate the curve at each suction (cm).
pub fn curve_rows(
    curve: &RetentionCurve,
    suctions_cm: &[f64],
    spec: Option<ConductivitySpec>,
) -> Vec<CurveRow> {
    let p = curve.params();
    suctions_cm
        .iter()
        .map(|&h| CurveRow {
            suction_cm: h,
            theta: curve.theta(h),
            effective_saturation: curve.effective_saturation(h),
            capacity_per_cm: curve.capacity(h),
            relative_conductivity: spec.and_then(|s| s.model.relative(h, p, s.pore_connectivity)),
            conductivity_cm_per_day: spec.and_then(|s| {
                s.model
                    .conductivity(h, p, s.ks_cm_per_day, s.pore_connectivity)
            }),
        })
        .collect()
}

/// Write the rows as CSV with the header of DESIGN.md; the conductivity columns only with
/// a `conductivity` model, which each row names. Values that are absent or not finite are
/// empty cells.
///
/// # Errors
/// Any error of the underlying writer.
pub fn write_curve_csv<W: Write>(
    out: W,
    rows: &[CurveRow],
    conductivity: Option<ConductivityModel>,
) -> Result<(), csv::Error> {
    let mut w = csv::Writer::from_writer(out);
    let mut header: Vec<&str> = RETENTION_COLUMNS.to_vec();
    if conductivity.is_some() {
        header.extend(CONDUCTIVITY_COLUMNS);
    }
    w.write_record(&header)?;
    let cell = |v: Option<f64>| v.map(format_number).unwrap_or_default();
    for row in rows {
        let mut record = vec![
            cell(Some(row.suction_cm)),
            cell(Some(row.theta)),
            cell(Some(row.effective_saturation)),
            cell(row.capacity_per_cm),
        ];
        if let Some(model) = conductivity {
            record.push(cell(row.relative_conductivity));
            record.push(cell(row.conductivity_cm_per_day));
            record.push(model.id().to_string());
        }
        w.write_record(&record)?;
    }
    w.flush()?;
    Ok(())
}

#[cfg(test)]
#[allow(clippy::float_cmp)]
mod tests {
    use super::*;

    fn brooks_corey() -> RetentionCurve {
        RetentionCurve::new(ModelKind::BrooksCorey, vec![0.02, 0.437, 7.26, 0.592]).expect("valid")
    }

    #[test]
    fn default_grid_has_five_points_per_decade() {
        let grid = default_suctions_cm();
        assert_eq!(grid.len(), 31);
        assert_eq!(grid[0], 1.0);
        assert!((grid[5] - 10.0).abs() < 1e-12);
        assert!((grid[30] / 1e6 - 1.0).abs() < 1e-12);
    }

    #[test]
    fn break_point_gives_an_empty_capacity_cell() {
        let rows = curve_rows(&brooks_corey(), &[7.26], None);
        let mut out = Vec::new();
        write_curve_csv(&mut out, &rows, None).expect("writes");
        let text = String::from_utf8(out).expect("utf-8");
        assert_eq!(
            text,
            "suction_cm,theta,effective_saturation,capacity_per_cm\n7.26,0.437,1,\n"
        );
    }

    #[test]
    fn conductivity_columns_only_with_ks() {
        let spec = ConductivitySpec::new(ModelKind::BrooksCorey, 504.0, None, None).expect("valid");
        let rows = curve_rows(&brooks_corey(), &[0.0, 100.0], Some(spec));
        let mut out = Vec::new();
        write_curve_csv(&mut out, &rows, Some(spec.model)).expect("writes");
        let text = String::from_utf8(out).expect("utf-8");
        let mut lines = text.lines();
        assert_eq!(
            lines.next(),
            Some(
                "suction_cm,theta,effective_saturation,capacity_per_cm,relative_conductivity,conductivity_cm_per_day,conductivity_model"
            )
        );
        assert_eq!(lines.next(), Some("0,0.437,1,0,1,504,burdine-brooks-corey"));
        assert_eq!(lines.count(), 1);
        // Mualem's form on request, named on every row.
        let mualem = ConductivitySpec::new(
            ModelKind::BrooksCorey,
            504.0,
            None,
            Some(ConductivityForm::Mualem),
        )
        .expect("valid");
        let rows = curve_rows(&brooks_corey(), &[100.0], Some(mualem));
        let mut out = Vec::new();
        write_curve_csv(&mut out, &rows, Some(mualem.model)).expect("writes");
        let text = String::from_utf8(out).expect("utf-8");
        assert!(text.ends_with(",mualem-brooks-corey\n"), "{text}");
        let mualem_kr = rows[0].relative_conductivity.expect("Kr");
        let burdine_kr = curve_rows(&brooks_corey(), &[100.0], Some(spec))[0]
            .relative_conductivity
            .expect("Kr");
        // Mualem's exponent (2.5 + 2/lambda with L = 0.5) is smaller than Burdine's (3 + 2/lambda).
        assert!(mualem_kr > burdine_kr);
    }

    #[test]
    fn options_are_checked() {
        assert_eq!(
            ConductivitySpec::new(ModelKind::FredlundXing, 10.0, None, None),
            Err(CurveTableError::Conductivity(
                ConductivityChoiceError::NoClosedForm(ModelKind::FredlundXing)
            ))
        );
        assert!(matches!(
            ConductivitySpec::new(ModelKind::VanGenuchten, f64::NAN, None, None),
            Err(CurveTableError::BadKs(v)) if v.is_nan()
        ));
        assert_eq!(
            ConductivitySpec::new(ModelKind::VanGenuchten, 0.0, None, None),
            Err(CurveTableError::BadKs(0.0))
        );
        assert!(matches!(
            ConductivitySpec::new(ModelKind::BrooksCorey, 10.0, Some(1.0), None),
            Err(CurveTableError::NoPoreConnectivity { .. })
        ));
        let spec =
            ConductivitySpec::new(ModelKind::VanGenuchten, 10.0, Some(-1.0), None).expect("ok");
        assert_eq!(spec.pore_connectivity, -1.0);
        assert!(matches!(
            suctions_to_cm(&[10.0, -1.0], SuctionUnit::Kpa),
            Err(CurveTableError::BadSuction { position: 2, .. })
        ));
        assert_eq!(
            suctions_to_cm(&[], SuctionUnit::Cm),
            Err(CurveTableError::NoSuctions)
        );
    }
}
