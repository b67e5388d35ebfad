//! The current fit of every selected sample with its standing (current, stale, failed, none)
//! and its derived values: what `list fits`, the export and the terminal UI show.

use std::collections::HashMap;

use rusqlite::Connection;

use super::water::{FitDerived, derive_fit};
use crate::model::conductivity::ConductivityForm;
use crate::store::fits::{self, FitState, SampleInfo, Selection, StoredFit};
use crate::store::{CampaignSettings, Result, layers};

/// One sample's current fit, standing and derived values.
#[derive(Debug, Clone, PartialEq)]
pub struct SampleFit {
    /// The sample.
    pub sample: SampleInfo,
    /// Where its fitting stands.
    pub state: FitState,
    /// Its current fit, if any.
    pub fit: Option<StoredFit>,
    /// Derived values of the current fit under the campaign's suctions.
    pub derived: Option<FitDerived>,
}

/// The current fits of the selected samples, in site, depth and code order.
///
/// # Errors
/// An SQLite error, or a stored fit that does not decode.
pub fn sample_fits(
    conn: &Connection,
    settings: &CampaignSettings,
    selection: &Selection,
) -> Result<Vec<SampleFit>> {
    sample_fits_with(conn, settings, selection, None)
}

/// As [`sample_fits`], with the derived conductivity in `conductivity` form where a model has
/// it (`None`: the form recorded with each fit).
///
/// # Errors
/// As [`sample_fits`].
pub fn sample_fits_with(
    conn: &Connection,
    settings: &CampaignSettings,
    selection: &Selection,
    conductivity: Option<ConductivityForm>,
) -> Result<Vec<SampleFit>> {
    let samples = fits::samples(conn, selection)?;
    let summaries = fits::summaries(conn, &samples)?;
    let ks: HashMap<i64, Option<f64>> = layers::list(conn, selection.site.as_deref())?
        .into_iter()
        .map(|row| (row.stored.id, row.stored.layer.ks_cm_per_day))
        .collect();
    let mut out = Vec::with_capacity(samples.len());
    for sample in samples {
        let state = summaries
            .get(&sample.id)
            .map_or(FitState::None, |s| s.state.clone());
        let fit = fits::current(conn, sample.id)?;
        let derived = fit.as_ref().and_then(|f| {
            derive_fit(
                f.report.as_ref()?,
                settings,
                ks.get(&sample.layer_id).copied().flatten(),
                conductivity.or(f.conductivity),
            )
        });
        let derived = super::joint::with_joint(conn, fit.as_ref(), derived, settings)?;
        out.push(SampleFit {
            sample,
            state,
            fit,
            derived,
        });
    }
    Ok(out)
}
