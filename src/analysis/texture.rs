//! Texture-informed fits: van Genuchten with the layer's texture-class prior (`fit --prior
//! texture`, or the campaign default for samples with few readings).
//!
//! The prior is the layer's USDA class's Carsel & Parrish (1988) distribution
//! ([`crate::model::texture`]); the fit is [`crate::fit::prior::fit_with_prior`]. The
//! readings' noise is the campaign's pooled method noise ([`super::advise::method_noise`])
//! where it has enough degrees of freedom, else [`DEFAULT_NOISE_SD`].

use crate::model::ptf::{OM_PER_OC, SAXTON_RAWLS_SOURCE, SaxtonRawls};
use std::collections::BTreeMap;
use std::sync::atomic::{AtomicUsize, Ordering};

use rayon::prelude::*;
use rusqlite::Connection;

use super::fitting::{
    FitAttempt, FitRunSummary, ModelChoice, Outcome, fit_input, record_in_chunks,
};
use super::water::{SiteProfile, SumInterval, TextureEstimate, recompute_totals};
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, StandardNormal};

use crate::fit::delta::quantile;
use crate::fit::prior::{
    BASIS_TEXTURE_ONLY, DEFAULT_NOISE_SD, Prior, PriorOptions, fit_with_prior,
};
use crate::fit::{FitOptions, Readings, fit_model};
use crate::fit::{Interval95, IntervalMethod, IntervalScale};
use crate::model::conductivity::ConductivityForm;
use crate::model::domain::LayerRef;
use crate::model::retention::ModelKind;
use crate::model::texture::{CARSEL_PARRISH_SOURCE, TextureClass};
use crate::store::fits::{self, FitInput, NewFit, Ranking, Selection};
use crate::store::{Campaign, CampaignSettings, StoreError, layers};

/// Which samples get the texture prior.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum PriorRule {
    /// None (readings only).
    Never,
    /// Every selected sample whose layer has a texture.
    Always,
    /// Samples with at most this many readings (the campaign default).
    AtMost(u32),
}

impl PriorRule {
    /// Whether a sample with `n` readings gets the prior.
    pub fn applies(self, n: usize) -> bool {
        match self {
            PriorRule::Never => false,
            PriorRule::Always => true,
            PriorRule::AtMost(k) => n <= k as usize,
        }
    }
}

/// The `requested` word of a fit with the texture prior.
pub const REQUESTED_WITH_PRIOR: &str = "van-genuchten+texture-prior";

/// The texture prior of a class.
pub fn class_prior(class: TextureClass) -> Prior {
    Prior {
        label: format!("{class}, Carsel & Parrish 1988"),
        source: CARSEL_PARRISH_SOURCE.to_string(),
        q: class.carsel_parrish().transformed(),
    }
}

/// The noise sd used for prior fits: every method's pooled level where it has enough degrees
/// of freedom, else [`DEFAULT_NOISE_SD`].
///
/// # Errors
/// As [`super::advise::method_noise`].
pub fn prior_noise(conn: &Connection) -> Result<f64, StoreError> {
    let pool = super::advise::method_noise(conn)?;
    Ok(pool
        .all
        .as_ref()
        .filter(|l| l.dof >= super::advise::MIN_POOL_DOF && l.variance > 0.0)
        .map_or(DEFAULT_NOISE_SD, |l| l.variance.sqrt()))
}

/// Fit one sample's readings with its class's prior: the readings-only van Genuchten fit (when
/// the readings allow one) is made first and kept in the report for the side-by-side view.
pub fn fit_with_class(
    readings: &Readings<'_>,
    class: TextureClass,
    noise_sd: f64,
    options: &FitOptions,
) -> FitAttempt {
    let model = ModelKind::VanGenuchten.id().to_string();
    if readings.x.is_empty() {
        // A sample's fit stands for its readings; a class mean is a layer's estimate
        // (`list profiles --fill-from-texture`), never a core's fit.
        return FitAttempt {
            model,
            report: None,
            message: Some(
                "no readings: the texture prior alone is the layer's estimate, not a fit of \
                 this sample"
                    .to_string(),
            ),
            auto: None,
        };
    }
    let plain = fit_model(ModelKind::VanGenuchten, readings, options)
        .ok()
        .filter(|r| r.converged);
    let prior_options = PriorOptions {
        noise_sd,
        weight: 1.0,
        readings_only: plain,
    };
    match fit_with_prior(readings, &class_prior(class), &prior_options) {
        Ok(report) => FitAttempt {
            model,
            report: Some(report),
            message: None,
            auto: None,
        },
        Err(e) => FitAttempt {
            model,
            report: None,
            message: Some(e.to_string()),
            auto: None,
        },
    }
}

/// The texture class of every layer of the inputs that has one.
fn classes(
    conn: &Connection,
    inputs: &[FitInput],
) -> Result<BTreeMap<String, TextureClass>, StoreError> {
    let mut out = BTreeMap::new();
    for input in inputs {
        let key = input.sample.layer.to_string();
        if out.contains_key(&key) {
            continue;
        }
        if let Some(found) = layers::find(conn, &input.sample.layer)? {
            let l = &found.layer;
            if let Some(c) = TextureClass::of_layer(l.sand_pct, l.silt_pct, l.clay_pct) {
                out.insert(key, c);
            }
        }
    }
    Ok(out)
}

/// The campaign's default prior rule for a fit of `choice` with nothing fixed: the texture
/// prior for samples with at most the campaign's N readings when the user set one
/// (`porewise set --texture-prior N`), for `auto` and van Genuchten fits only.
///
/// # Errors
/// An SQLite error.
pub fn default_rule(
    conn: &Connection,
    choice: ModelChoice,
    options: &FitOptions,
) -> Result<PriorRule, StoreError> {
    if !options.fixed().is_empty()
        || !matches!(
            choice,
            ModelChoice::Auto | ModelChoice::One(ModelKind::VanGenuchten)
        )
    {
        return Ok(PriorRule::Never);
    }
    Ok(crate::store::texture::prior_default(conn)?.map_or(PriorRule::Never, PriorRule::AtMost))
}

/// A campaign fit under the campaign's default prior rule ([`default_rule`]): the plain
/// campaign fit when there is none. The terminal UI's refits go through here, so they fit
/// as `porewise fit` does.
///
/// # Errors
/// As [`super::fit_campaign`].
pub fn fit_campaign_by_default(
    campaign: &mut Campaign,
    selection: &Selection,
    choice: ModelChoice,
    options: &FitOptions,
    progress: &(dyn Fn(usize, usize) + Sync),
) -> Result<FitRunSummary, StoreError> {
    match default_rule(campaign.connection(), choice, options)? {
        PriorRule::Never => super::fit_campaign(campaign, selection, choice, options, progress),
        rule => fit_campaign_with_prior(campaign, selection, choice, options, rule, None, progress)
            .map(|s| s.run),
    }
}

/// What a campaign fit with a prior rule did, beyond [`FitRunSummary`].
#[derive(Debug, Clone, Default, PartialEq)]
pub struct PriorRunSummary {
    /// The fits and failures.
    pub run: FitRunSummary,
    /// Samples fitted with the prior, with their class.
    pub with_prior: Vec<(String, TextureClass)>,
    /// Samples the rule chose whose layer has no texture (fitted from the readings alone).
    pub no_texture: Vec<(String, LayerRef)>,
    /// The readings' noise sd assumed, m3/m3.
    pub noise_sd: f64,
}

/// As [`super::fit_campaign_with`], with samples that `rule` picks (and whose layer has a
/// texture) fitted by van Genuchten with their class's prior instead of `choice`. The same
/// recording: fitted outside the write lock, recorded in short transactions, each sample's
/// readings checked before its fit is recorded.
///
/// # Errors
/// As [`super::fit_campaign`].
pub fn fit_campaign_with_prior(
    campaign: &mut Campaign,
    selection: &Selection,
    choice: ModelChoice,
    options: &FitOptions,
    rule: PriorRule,
    conductivity: Option<ConductivityForm>,
    progress: &(dyn Fn(usize, usize) + Sync),
) -> Result<PriorRunSummary, StoreError> {
    let (inputs, classes, noise_sd) = {
        let tx = campaign.read_transaction()?;
        selection.check(&tx)?;
        let inputs = fits::inputs(&tx, selection)?;
        let classes = classes(&tx, &inputs)?;
        let noise = prior_noise(&tx)?;
        (inputs, classes, noise)
    };
    let total = inputs.len();
    progress(0, total);
    let done = AtomicUsize::new(0);
    let fixed = options.fixed();
    let plain_requested = choice.to_string();
    let outcomes: Vec<_> = inputs
        .par_iter()
        .map(|input| {
            let class = rule
                .applies(input.h_cm.len())
                .then(|| classes.get(&input.sample.layer.to_string()).copied())
                .flatten();
            let attempt = match class {
                Some(class) => {
                    let readings = Readings::new(&input.h_cm, &input.theta);
                    let readings = match &input.weights {
                        Some(w) => readings.with_weights(w),
                        None => readings,
                    };
                    fit_with_class(&readings, class, noise_sd, options)
                }
                None => fit_input(input, choice, options),
            };
            let requested = if class.is_some() {
                REQUESTED_WITH_PRIOR
            } else {
                plain_requested.as_str()
            };
            let ranking = attempt.auto.as_ref().map(Ranking::from);
            let failure = attempt.failure();
            let row = fits::encode(&NewFit {
                input,
                requested,
                model: &attempt.model,
                fixed,
                report: attempt.report.as_ref(),
                ranking: ranking.as_ref(),
                failure: failure.as_deref(),
                conductivity,
            });
            progress(done.fetch_add(1, Ordering::Relaxed) + 1, total);
            (attempt.model, failure, row, class)
        })
        .collect();
    let mut summary = PriorRunSummary {
        noise_sd,
        ..PriorRunSummary::default()
    };
    for input in &inputs {
        if rule.applies(input.h_cm.len()) && !classes.contains_key(&input.sample.layer.to_string())
        {
            summary
                .no_texture
                .push((input.sample.code.clone(), input.sample.layer.clone()));
        }
    }
    let mut with_prior = Vec::new();
    let attempts = outcomes.into_iter().map(|(model, failure, row, class)| {
        (
            Outcome {
                model,
                failure,
                row,
            },
            class,
        )
    });
    summary.run = record_in_chunks(
        campaign,
        inputs.iter().zip(attempts),
        total,
        |code, class| {
            if let Some(class) = class {
                with_prior.push((code.to_string(), class));
            }
        },
    )?;
    summary.with_prior = with_prior;
    Ok(summary)
}

/// How a layer estimate is described in listings and reports.
pub fn estimate_source(class: TextureClass) -> String {
    format!(
        "estimate from texture: {class} class mean ({CARSEL_PARRISH_SOURCE}); interval from \
         the class spread"
    )
}

/// A layer's estimate from its texture class: the class-mean curve, its available water and
/// that value's 95 % interval from the class spread.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct LayerEstimate {
    /// The class.
    pub class: TextureClass,
    /// `texture only`.
    pub basis: &'static str,
    /// How it was made and where its numbers come from.
    pub source: String,
    /// van Genuchten theta_r, theta_s (m3/m3), alpha (1/cm), n of the class mean.
    pub parameters: [f64; 4],
    /// Available water between the two suctions, m3/m3.
    pub available_water: f64,
    /// Its 95 % interval from the class spread.
    pub interval: Option<Interval95>,
}

/// Parameter draws behind a class estimate's interval.
pub const ESTIMATE_DRAWS: usize = 4000;
const ESTIMATE_SEED: u64 = 0x1988;

/// The estimate of a layer of `class` between field capacity and wilting point (kPa).
///
/// The value is the class-mean curve's available water. Its 95 % interval is the 2.5 and
/// 97.5 percentiles of the available water of [`ESTIMATE_DRAWS`] parameter sets drawn from
/// the class distribution (q normal, seeded; sets outside the model's bounds or with theta_r
/// at or above theta_s redrawn), so it follows the class spread through the curve and never
/// leaves the possible range; its `se` is the draws' standard deviation (what the profile
/// total adds up).
pub fn layer_estimate(class: TextureClass, fc_kpa: f64, pwp_kpa: f64) -> Option<LayerEstimate> {
    let mean = class.carsel_parrish().mean();
    let aw = |p: &[f64]| -> Option<f64> {
        let curve = ModelKind::VanGenuchten.curve();
        let fc = fc_kpa * crate::model::units::CM_PER_KPA;
        let pwp = pwp_kpa * crate::model::units::CM_PER_KPA;
        let v = curve.value(fc, p) - curve.value(pwp, p);
        v.is_finite().then_some(v)
    };
    let value = aw(&mean)?;
    let q = class.carsel_parrish().transformed();
    let mut rng = ChaCha8Rng::seed_from_u64(ESTIMATE_SEED);
    let mut draws = Vec::with_capacity(ESTIMATE_DRAWS);
    let mut attempts = 0;
    while draws.len() < ESTIMATE_DRAWS && attempts < 20 * ESTIMATE_DRAWS {
        attempts += 1;
        let z: [f64; 4] = std::array::from_fn(|j| {
            let n: f64 = StandardNormal.sample(&mut rng);
            q[j].mean + q[j].sd * n
        });
        let p = [z[0], z[1], z[2].exp(), 1.0 + z[3].exp()];
        let inside = ModelKind::VanGenuchten
            .params()
            .iter()
            .zip(&p)
            .all(|(spec, v)| (spec.lower..=spec.upper).contains(v))
            && p[0] < p[1];
        if let Some(v) = inside.then(|| aw(&p)).flatten() {
            draws.push(v);
        }
    }
    let interval = (draws.len() == ESTIMATE_DRAWS).then(|| {
        draws.sort_by(f64::total_cmp);
        let n = draws.len() as f64;
        let m = draws.iter().sum::<f64>() / n;
        let sd = (draws.iter().map(|d| (d - m) * (d - m)).sum::<f64>() / (n - 1.0)).sqrt();
        Interval95 {
            lo95: quantile(&draws, 0.025),
            hi95: quantile(&draws, 0.975),
            se: sd,
            scale: IntervalScale::Linear,
            method: IntervalMethod::MonteCarlo,
            note: Some(format!(
                "class spread: 2.5-97.5 % of {ESTIMATE_DRAWS} parameter sets drawn from the \
                 {class} distribution"
            )),
        }
    });
    Some(LayerEstimate {
        class,
        basis: BASIS_TEXTURE_ONLY,
        source: estimate_source(class),
        parameters: mean,
        available_water: value,
        interval,
    })
}

/// A layer's second estimate beside the class mean: a continuous pedotransfer function of its
/// sand, clay and organic carbon ([`SaxtonRawls`]), at the campaign's field capacity and
/// wilting point. It is not put in profile sums (the class mean, with its spread, is).
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct PedotransferEstimate {
    /// Where the numbers come from.
    pub source: String,
    /// Water content at field capacity, m3/m3.
    pub theta_fc_m3_m3: f64,
    /// Water content at the wilting point, m3/m3.
    pub theta_pwp_m3_m3: f64,
    /// Available water between them, m3/m3.
    pub available_water_m3_m3: f64,
    /// Water content at saturation, m3/m3.
    pub theta_s_m3_m3: f64,
    /// Saturated conductivity, cm/day.
    pub ks_cm_per_day: f64,
}

/// [`PedotransferEstimate`] of a layer with sand, clay and organic carbon (% by mass); `None`
/// when one is missing, the inputs are out of range, or field capacity or wilting point lie
/// outside the 0-1500 kPa the equations cover.
pub fn pedotransfer_estimate(
    sand_pct: Option<f64>,
    clay_pct: Option<f64>,
    organic_carbon_pct: Option<f64>,
    fc_kpa: f64,
    pwp_kpa: f64,
) -> Option<PedotransferEstimate> {
    let om = organic_carbon_pct? * OM_PER_OC;
    let sr = SaxtonRawls::new(sand_pct?, clay_pct?, om)?;
    let fc = sr.theta_at(fc_kpa)?;
    let pwp = sr.theta_at(pwp_kpa)?;
    Some(PedotransferEstimate {
        source: SAXTON_RAWLS_SOURCE.to_string(),
        theta_fc_m3_m3: fc,
        theta_pwp_m3_m3: pwp,
        available_water_m3_m3: fc - pwp,
        theta_s_m3_m3: sr.theta_s,
        ks_cm_per_day: sr.ks_cm_per_day(),
    })
}

/// Fill the layers of `profiles` that have a texture but no fitted lab core with their
/// class's estimate ([`layer_estimate`]), marked as such, and recompute the totals. Layers
/// with a fitted core keep their measured value.
pub fn fill_from_texture(profiles: &mut [SiteProfile], settings: &CampaignSettings) {
    for p in profiles.iter_mut() {
        fill_profile(p, settings.fc_kpa, settings.pwp_kpa);
    }
}

/// [`fill_from_texture`] of one profile, between field capacity and wilting point (kPa).
pub fn fill_profile(p: &mut SiteProfile, fc_kpa: f64, pwp_kpa: f64) {
    {
        let mut filled = false;
        for l in &mut p.layers {
            if l.fitted_cores > 0 || l.available_water.is_some() {
                continue;
            }
            let Some(class) = l.texture else { continue };
            let Some(e) = layer_estimate(class, fc_kpa, pwp_kpa) else {
                continue;
            };
            let mm = l.depth_in_zone_cm * 10.0;
            // The class spread's percentiles as they are (asymmetric), its sd for the total.
            let sum = e.interval.as_ref().map(|i| SumInterval {
                lo95: i.lo95,
                hi95: i.hi95,
                se: i.se,
            });
            l.available_water = Some(e.available_water);
            l.available_water_interval = sum;
            l.water_mm = Some(e.available_water * mm);
            l.water_mm_interval = sum.map(|i| i.scaled(mm));
            l.interval_note = Some(e.source.clone());
            l.estimate = Some(TextureEstimate {
                class,
                basis: e.basis,
                source: e.source,
                parameters: e.parameters,
            });
            filled = true;
        }
        if filled {
            recompute_totals(p);
        }
    }
}

#[cfg(test)]
#[allow(clippy::float_cmp)]
mod tests {
    use super::*;

    #[test]
    fn class_estimates_carry_the_class_spread_inside_the_possible_range() {
        for class in TextureClass::ALL {
            let e = layer_estimate(class, 33.0, 1500.0).expect("estimate");
            let i = e.interval.as_ref().expect("interval");
            // Available water of a falling curve is never negative.
            assert!(i.lo95 >= 0.0, "{class}: {i:?}");
            assert!(i.lo95 < i.hi95 && i.se > 0.0, "{class}: {i:?}");
            assert_eq!(e.parameters, class.carsel_parrish().mean());
            assert_eq!(e.basis, BASIS_TEXTURE_ONLY);
            // Seeded: the same interval every time.
            assert_eq!(layer_estimate(class, 33.0, 1500.0), Some(e.clone()));
        }
        // The loam class mean's available water between 33 and 1500 kPa, from the curve.
        let loam = layer_estimate(TextureClass::Loam, 33.0, 1500.0).expect("estimate");
        let p = TextureClass::Loam.carsel_parrish().mean();
        let vg = ModelKind::VanGenuchten.curve();
        let cm = crate::model::units::CM_PER_KPA;
        let aw = vg.value(33.0 * cm, &p) - vg.value(1500.0 * cm, &p);
        assert!((loam.available_water - aw).abs() < 1e-15);
    }

    #[test]
    fn the_prior_rule_picks_samples_by_their_readings() {
        assert!(PriorRule::AtMost(5).applies(5));
        assert!(!PriorRule::AtMost(5).applies(6));
        assert!(PriorRule::Always.applies(100));
        assert!(!PriorRule::Never.applies(0));
        let none = fit_with_class(
            &Readings::new(&[], &[]),
            TextureClass::Loam,
            0.01,
            &FitOptions::new(),
        );
        assert!(none.report.is_none() && none.failure().is_some());
    }

    #[test]
    #[allow(clippy::unreadable_literal)] // digits as the reference table prints them
    fn the_pedotransfer_estimate_is_the_saxton_rawls_curve_at_the_campaign_suctions() {
        // Loam at its representative point, organic matter 2.5 % (organic carbon 2.5 / 1.724):
        // theta_33 0.2796101649 and theta_1500 0.1370236 (Saxton & Rawls 2006, Table 1
        // equations; values of table T7 of the project's soil reference).
        let e = pedotransfer_estimate(Some(40.0), Some(20.0), Some(2.5 / OM_PER_OC), 33.0, 1500.0)
            .expect("estimate");
        assert!((e.theta_fc_m3_m3 - 0.2796101649).abs() < 1e-9, "{e:?}");
        assert!((e.theta_pwp_m3_m3 - 0.1370236).abs() < 1e-7, "{e:?}");
        assert!((e.available_water_m3_m3 - (0.2796101649 - 0.1370236)).abs() < 1e-7);
        // 15.4756564 mm/h = 37.14157536 cm/day.
        assert!((e.ks_cm_per_day - 15.4756564 * 2.4).abs() < 1e-5, "{e:?}");
        assert!(e.source.starts_with("Saxton & Rawls (2006)"));
        // Without organic carbon, or with a wilting point beyond the equations' range: none.
        assert!(pedotransfer_estimate(Some(40.0), Some(20.0), None, 33.0, 1500.0).is_none());
        assert!(pedotransfer_estimate(Some(40.0), Some(20.0), Some(1.0), 33.0, 2000.0).is_none());
    }
}
