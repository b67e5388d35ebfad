//! The terminal UI's state: plain data, loaded from the store by the runtime and changed only
//! by [`update`](super::update::update).
//!
//! Nothing here holds a connection, a terminal or a channel. The constructors turn library
//! values (outline, stored fits, readings, profiles) into what the panes show, so they can be
//! tested without a database.

use std::collections::{BTreeSet, HashMap};

use crate::analysis::{BetweenCores, FitDerived, ModelChoice, SampleFit, SiteProfile, SumInterval};
use crate::fit::ParamEstimate;
use crate::fit::band::confidence_band;
use crate::model::domain::{Branch, FlagTarget, SampleKind, SensorKind};
use crate::model::retention::ModelKind;
use crate::model::units::{CM_PER_KPA, SuctionUnit};
use crate::store::fits::{FitState, FitSummary, Ranking, SampleInfo, StoredFit};
use crate::store::outline::{Outline, OutlineLayer};
use crate::store::readings::StoredReading;

use super::theme::Theme;
use super::worker::JobBoard;

pub mod conductivity;
pub mod depth;
pub mod review;
pub mod series;
pub mod texture_fill;
pub mod tree;

pub use depth::{DepthData, DepthLayer, DepthRow, DepthState, LAYER_MARKS, LayerCurve};
pub use tree::{LayerNode, NodeKey, SampleNode, SiteNode, Tree, TreeRow};

pub use super::signs::{FitTag, Tone};
pub use review::ReviewEpisode;
pub use series::{SensorInfo, SensorSeries, SeriesData, SeriesRequest, SeriesState};

/// Which screen fills the terminal.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum Screen {
    /// The campaign tree with the selected sample's curve, readings and fit card.
    #[default]
    Browse,
    /// Every layer of one site: curves overlaid, parameters by depth, profile water.
    Depth,
    /// Suspected outliers across the campaign, worst first.
    Review,
    /// A site's logger series: suction and water content against time.
    Series,
    /// Every key, from the key table.
    Help,
}

/// The panes of the browse screen, in Tab order.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum Pane {
    /// The campaign tree.
    #[default]
    Tree,
    /// The retention curve.
    Curve,
    /// The readings table.
    Readings,
    /// The fit card.
    Card,
}

impl Pane {
    /// Tab order.
    pub const ALL: [Pane; 4] = [Pane::Tree, Pane::Curve, Pane::Readings, Pane::Card];

    /// The pane after this one (`step` 1) or before it (`step` -1).
    #[must_use]
    pub fn cycle(self, step: isize) -> Pane {
        let i = Self::ALL.iter().position(|p| *p == self).unwrap_or(0) as isize;
        Self::ALL[(i + step).rem_euclid(Self::ALL.len() as isize) as usize]
    }

    /// Its title.
    pub fn title(self) -> &'static str {
        match self {
            Pane::Tree => "Campaign",
            Pane::Curve => "Curve",
            Pane::Readings => "Readings",
            Pane::Card => "Fit",
        }
    }
}

/// Suction unit of the axes and tables: the three a hydrologist switches between.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum AxisUnit {
    /// cm of water.
    #[default]
    Cm,
    /// kPa.
    Kpa,
    /// pF = log10(h / cm).
    Pf,
}

impl AxisUnit {
    /// The next unit in the cycle cm, kPa, pF.
    #[must_use]
    pub fn next(self) -> AxisUnit {
        match self {
            AxisUnit::Cm => AxisUnit::Kpa,
            AxisUnit::Kpa => AxisUnit::Pf,
            AxisUnit::Pf => AxisUnit::Cm,
        }
    }

    /// The library's unit.
    pub fn suction_unit(self) -> SuctionUnit {
        match self {
            AxisUnit::Cm => SuctionUnit::Cm,
            AxisUnit::Kpa => SuctionUnit::Kpa,
            AxisUnit::Pf => SuctionUnit::Pf,
        }
    }

    /// Display symbol.
    pub fn symbol(self) -> &'static str {
        self.suction_unit().symbol()
    }
}

/// Lowest plotted suction, as log10(h / cm): 0.1 cm; readings at h = 0 sit on this edge.
pub const PLOT_X_MIN: f64 = -1.0;
/// Highest plotted suction by default, as log10(h / cm): 10^5 cm (about 9800 kPa).
pub const PLOT_X_MAX: f64 = 5.0;
/// Points on a plotted curve.
pub const CURVE_POINTS: usize = 161;

/// The plot's x coordinate of a suction: log10(h / cm), h = 0 clamped to the left edge.
pub fn plot_x(h_cm: f64) -> f64 {
    if h_cm > 0.0 {
        h_cm.log10().max(PLOT_X_MIN)
    } else {
        PLOT_X_MIN
    }
}

/// A short tag for a model identifier, for narrow columns.
pub fn model_tag(model: &str) -> &'static str {
    match model.parse::<ModelKind>() {
        Ok(ModelKind::VanGenuchten) => "VG",
        Ok(ModelKind::VanGenuchtenFreeM) => "VGm",
        Ok(ModelKind::BrooksCorey) => "BC",
        Ok(ModelKind::Kosugi) => "KO",
        Ok(ModelKind::FredlundXing) => "FX",
        Ok(ModelKind::Durner) => "DU",
        Ok(ModelKind::Campbell) => "CA",
        Err(_) => "?",
    }
}

/// A live flag on a reading, as the readings table shows it.
#[derive(Debug, Clone, PartialEq)]
pub struct FlagMark {
    /// Flag id.
    pub id: i64,
    /// `suggested`, `accepted`, ...
    pub status: String,
    /// `auto` or `manual`.
    pub origin: String,
    /// Why.
    pub reason: String,
    /// Whether fits leave the reading out because of it.
    pub excludes: bool,
}

/// One reading row.
#[derive(Debug, Clone, PartialEq)]
pub struct ReadingView {
    /// Reading id.
    pub id: i64,
    /// Suction, cm.
    pub h_cm: f64,
    /// Water content, m3/m3.
    pub theta: f64,
    /// Measurement method.
    pub method: Option<String>,
    /// Drying, wetting or not recorded (field pairings tell them apart).
    pub branch: Branch,
    /// observed - fitted, from the current fit (for an excluded reading, against its curve).
    pub residual: Option<f64>,
    /// Internally studentized residual (readings the fit used).
    pub studentized: Option<f64>,
    /// Left out of fits by a flag.
    pub excluded: bool,
    /// Its live flag, if any.
    pub flag: Option<FlagMark>,
}

/// The current fit, as the card shows it.
#[derive(Debug, Clone, PartialEq)]
pub struct FitView {
    /// Fit id.
    pub id: i64,
    /// Model identifier.
    pub model: String,
    /// What was asked for (`auto` or a model).
    pub requested: Option<String>,
    /// Every parameter.
    pub parameters: Vec<ParamEstimate>,
    /// Readings used.
    pub n_points: usize,
    /// Root mean square error, m3/m3.
    pub rmse: f64,
    /// Coefficient of determination.
    pub r2: Option<f64>,
    /// AICc.
    pub aicc: Option<f64>,
    /// BIC.
    pub bic: Option<f64>,
    /// Solver's notes.
    pub message: Option<String>,
    /// Derived values under the campaign's FC and PWP.
    pub derived: Option<FitDerived>,
    /// The `auto` ranking, when fitted with auto.
    pub ranking: Option<Ranking>,
    /// Which suction to measure next for available water, or why there is no advice
    /// (`None` for a field pairing).
    pub next: Option<Result<NextStep, String>>,
    /// The texture prior of a fit made with one (the card shows it beside the readings-only
    /// fit).
    pub prior: Option<crate::fit::prior::PriorBasis>,
}

/// The fit card's advice: the one more reading that would shrink the 95 % interval of
/// available water most ([`crate::analysis::advise`]).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct NextStep {
    /// The suction to measure, cm.
    pub h_cm: f64,
    /// Available water's 95 % half-width now, m3/m3.
    pub now: f64,
    /// Its expected half-width after the reading, m3/m3.
    pub after: f64,
    /// The noise assumed is the campaign's pooled noise (the fit has few degrees of freedom).
    pub pooled: bool,
}

impl NextStep {
    /// The card's view of an advice.
    pub fn of(advice: &crate::analysis::advise::FitAdvice) -> Self {
        let best = advice.best_step();
        NextStep {
            h_cm: best.h_cm,
            now: advice.now,
            after: best.after,
            pooled: advice.noise.basis == crate::analysis::advise::NoiseBasis::Pooled,
        }
    }
}

/// The selected sample with everything its panes show.
#[derive(Debug, Clone, PartialEq)]
pub struct SampleDetail {
    /// Database id.
    pub id: i64,
    /// Code.
    pub code: String,
    /// Site code.
    pub site: String,
    /// Layer depths, cm.
    pub top_cm: f64,
    /// Lower boundary, cm.
    pub bottom_cm: f64,
    /// Horizon label.
    pub horizon: Option<String>,
    /// Lab core or field pairing.
    pub kind: SampleKind,
    /// Fit standing with reasons.
    pub state: FitState,
    /// Readings, driest last.
    pub readings: Vec<ReadingView>,
    /// The current fit.
    pub fit: Option<FitView>,
    /// The fitted curve as (log10 h, theta), left to right.
    pub curve: Vec<(f64, f64)>,
    /// Its 95 % band as (log10 h, lower, upper).
    pub band: Vec<(f64, f64, f64)>,
    /// Right edge of the plot, log10(h / cm).
    pub x_max: f64,
    /// Campaign FC and PWP suctions, kPa.
    pub fc_kpa: f64,
    /// Wilting point, kPa.
    pub pwp_kpa: f64,
    /// Its conductivity view (measured K, fitted or predicted K(h), Ks), when it has one.
    pub conductivity: Option<conductivity::ConductivityPanel>,
}

/// A curve as (log10 h, theta) points and its band as (log10 h, lower, upper).
type CurveAndBand = (Vec<(f64, f64)>, Vec<(f64, f64, f64)>);

/// Sample the curve of a report at [`CURVE_POINTS`] suctions from the plot's left edge to
/// `x_max`.
fn curve_points(fit: &StoredFit, x_max: f64) -> CurveAndBand {
    let Some(report) = &fit.report else {
        return (Vec::new(), Vec::new());
    };
    let Some(curve) = crate::analysis::water::curve_of(report) else {
        return (Vec::new(), Vec::new());
    };
    let step = (x_max - PLOT_X_MIN) / (CURVE_POINTS - 1) as f64;
    let xs: Vec<f64> = (0..CURVE_POINTS)
        .map(|i| PLOT_X_MIN + step * i as f64)
        .collect();
    let points = xs
        .iter()
        .map(|&x| (x, curve.theta(10f64.powf(x))))
        .filter(|(_, t)| t.is_finite())
        .collect();
    let hs: Vec<f64> = xs.iter().map(|&x| 10f64.powf(x)).collect();
    let band = confidence_band(report, &hs)
        .unwrap_or_default()
        .into_iter()
        .map(|b| (plot_x(b.h_cm), b.lower.max(0.0), b.upper.min(1.0)))
        .collect();
    (points, band)
}

/// What the store says about one sample, gathered by the runtime.
#[derive(Debug, Clone)]
pub struct SampleParts<'a> {
    /// The sample.
    pub info: &'a SampleInfo,
    /// Its layer.
    pub layer: &'a OutlineLayer,
    /// Its standing.
    pub state: FitState,
    /// Its readings.
    pub readings: &'a [StoredReading],
    /// Live flags by reading id.
    pub flags: &'a HashMap<i64, FlagMark>,
    /// The current fit.
    pub fit: Option<&'a StoredFit>,
    /// Derived values of the current fit.
    pub derived: Option<FitDerived>,
    /// Campaign FC suction, kPa.
    pub fc_kpa: f64,
    /// Campaign PWP suction, kPa.
    pub pwp_kpa: f64,
    /// The advice for the current fit (`None` without one).
    pub advice: Option<Result<crate::analysis::advise::FitAdvice, String>>,
}

impl SampleDetail {
    /// Gather the panes' content for one sample.
    pub fn from_parts(parts: &SampleParts<'_>) -> SampleDetail {
        let diag: HashMap<i64, usize> = parts
            .fit
            .map(|f| {
                f.reading_ids
                    .iter()
                    .enumerate()
                    .map(|(i, id)| (*id, i))
                    .collect()
            })
            .unwrap_or_default();
        let report = parts.fit.and_then(|f| f.report.as_ref());
        let curve = report.and_then(crate::analysis::water::curve_of);
        let readings = parts
            .readings
            .iter()
            .map(|r| {
                let flag = parts.flags.get(&r.id).cloned();
                let fitted = diag
                    .get(&r.id)
                    .and_then(|&i| report.and_then(|rep| rep.readings.get(i)));
                let residual = fitted.map(|d| d.residual).or_else(|| {
                    curve
                        .as_ref()
                        .map(|c| r.reading.theta - c.theta(r.reading.h_cm))
                        .filter(|v| v.is_finite())
                });
                ReadingView {
                    id: r.id,
                    h_cm: r.reading.h_cm,
                    theta: r.reading.theta,
                    method: r.reading.method.as_ref().map(|m| m.as_str().to_string()),
                    branch: r.reading.branch,
                    residual,
                    studentized: fitted.and_then(|d| d.studentized),
                    excluded: flag.as_ref().is_some_and(|f| f.excludes),
                    flag,
                }
            })
            .collect::<Vec<_>>();
        let h_max = readings.iter().map(|r| r.h_cm).fold(0.0_f64, f64::max);
        let x_max = PLOT_X_MAX.max(plot_x(h_max).ceil());
        let (curve_pts, band) = parts
            .fit
            .map(|f| curve_points(f, x_max))
            .unwrap_or_default();
        let fit = parts.fit.and_then(|f| {
            let report = f.report.as_ref()?;
            Some(FitView {
                id: f.id,
                model: f.model.clone(),
                requested: f.requested.clone(),
                parameters: report.parameters.clone(),
                n_points: report.n_points,
                rmse: report.rmse,
                r2: report.r2,
                aicc: report.aicc,
                bic: report.bic,
                message: report.message.clone(),
                derived: parts.derived.clone(),
                ranking: f.ranking.clone(),
                next: (parts.info.kind == SampleKind::LabCore)
                    .then(|| parts.advice.clone())
                    .flatten()
                    .map(|a| a.map(|a| NextStep::of(&a))),
                prior: report.prior.clone(),
            })
        });
        SampleDetail {
            id: parts.info.id,
            code: parts.info.code.clone(),
            site: parts.info.layer.site.clone(),
            top_cm: parts.info.layer.top_cm,
            bottom_cm: parts.info.layer.bottom_cm,
            horizon: parts.layer.horizon.clone(),
            kind: parts.info.kind,
            state: parts.state.clone(),
            readings,
            fit,
            curve: curve_pts,
            band,
            x_max,
            fc_kpa: parts.fc_kpa,
            pwp_kpa: parts.pwp_kpa,
            conductivity: None,
        }
    }

    /// log10(h / cm) of field capacity and of the wilting point.
    pub fn fc_pwp_x(&self) -> (f64, f64) {
        (
            plot_x(self.fc_kpa * CM_PER_KPA),
            plot_x(self.pwp_kpa * CM_PER_KPA),
        )
    }
}

/// The selected sample's panes: nothing selected, loading, loaded or failed.
#[derive(Debug, Clone, Default, PartialEq)]
pub enum Detail {
    /// No sample selected.
    #[default]
    Empty,
    /// Asked the runtime for this sample.
    Loading(i64),
    /// Loaded.
    Ready(Box<SampleDetail>),
    /// The load failed.
    Failed(i64, String),
}

impl Detail {
    /// The loaded sample.
    pub fn ready(&self) -> Option<&SampleDetail> {
        match self {
            Detail::Ready(d) => Some(d),
            _ => None,
        }
    }

    /// The sample shown or wanted.
    pub fn sample_id(&self) -> Option<i64> {
        match self {
            Detail::Empty => None,
            Detail::Loading(id) | Detail::Failed(id, _) => Some(*id),
            Detail::Ready(d) => Some(d.id),
        }
    }
}

/// What a review item is about: a retention reading, or a field logger record.
#[derive(Debug, Clone, PartialEq)]
pub enum Suspect {
    /// A lab or field-pairing reading.
    Reading {
        /// Reading id.
        reading_id: i64,
        /// Sample id.
        sample_id: i64,
        /// Sample code.
        sample: String,
        /// Suction, cm.
        h_cm: f64,
        /// Water content, m3/m3.
        theta: f64,
    },
    /// A logger record.
    Record {
        /// Logger record id.
        record_id: i64,
        /// Site code.
        site: String,
        /// Sensor depth, cm.
        depth_cm: f64,
        /// Tensiometer or water content.
        kind: SensorKind,
        /// The sensor's id.
        sensor_id: String,
        /// Seconds since 1970 UTC.
        time: i64,
        /// Suction head (cm) or water content (m3/m3).
        value: f64,
    },
}

/// A suspect in the review queue.
#[derive(Debug, Clone, PartialEq)]
pub struct ReviewItem {
    /// Flag id.
    pub flag_id: i64,
    /// The reading or record.
    pub suspect: Suspect,
    /// Why it was flagged.
    pub reason: String,
    /// How suspicious (larger is worse).
    pub score: Option<f64>,
}

impl ReviewItem {
    /// The sample of a suspect reading.
    pub fn sample_id(&self) -> Option<i64> {
        match &self.suspect {
            Suspect::Reading { sample_id, .. } => Some(*sample_id),
            Suspect::Record { .. } => None,
        }
    }

    /// The suspect reading's id.
    pub fn reading_id(&self) -> Option<i64> {
        match &self.suspect {
            Suspect::Reading { reading_id, .. } => Some(*reading_id),
            Suspect::Record { .. } => None,
        }
    }

    /// The flag's target.
    pub fn target(&self) -> crate::model::domain::FlagTarget {
        match &self.suspect {
            Suspect::Reading { reading_id, .. } => FlagTarget::Reading(*reading_id),
            Suspect::Record { record_id, .. } => FlagTarget::LoggerRecord(*record_id),
        }
    }
}

/// The review screen.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct ReviewState {
    /// The rows on screen, worst first: each episode's worst suspect, or the suspects of the
    /// opened episode.
    pub items: Vec<ReviewItem>,
    /// The queue grouped into episodes ([`review`]), worst first.
    pub episodes: Vec<ReviewEpisode>,
    /// The episode opened with Enter (an index into `episodes`).
    pub opened: Option<usize>,
    /// Index into `items`.
    pub cursor: usize,
    /// The queue has been loaded at least once.
    pub loaded: bool,
    /// Why there is no queue (the flag store is missing), when there is none.
    pub unavailable: Option<String>,
    /// The series around a suspect record: the request wanted and its answer.
    pub series_wanted: Option<SeriesRequest>,
    /// The loaded series (for `series_wanted`).
    pub series: Option<SeriesData>,
}

/// A line of text being typed.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub enum Input {
    /// Keys are commands.
    #[default]
    None,
    /// Typing the tree filter.
    Filter(String),
    /// Typing the reason for flagging (or the note for clearing) a reading.
    Reason {
        /// The reading or conductivity reading.
        target: FlagTarget,
        /// True to set a flag, false to clear the one it has.
        flag: bool,
        /// What is typed so far.
        text: String,
    },
    /// Asking whether to quit while a fit is running.
    ConfirmQuit,
}

/// The status line's message.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct Status {
    /// The text.
    pub text: String,
    /// Its tone.
    pub tone: Tone,
}

/// The whole UI state.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct AppState {
    /// Campaign name.
    pub campaign: String,
    /// File name of the campaign (no directory).
    pub file: String,
    /// Field capacity and wilting point suctions, kPa.
    pub fc_kpa: f64,
    /// Wilting point, kPa.
    pub pwp_kpa: f64,
    /// The tree.
    pub tree: Tree,
    /// The selected sample.
    pub detail: Detail,
    /// Row of the readings table (the highlighted point on the curve).
    pub reading: usize,
    /// Scroll of the fit card.
    pub card_scroll: u16,
    /// The depth screen.
    pub depth: DepthState,
    /// The review screen.
    pub review: ReviewState,
    /// The logger series screen.
    pub series: SeriesState,
    /// The screen shown.
    pub screen: Screen,
    /// The screen to go back to from help.
    pub back_to: Screen,
    /// Focused pane of the browse screen.
    pub focus: Pane,
    /// Suction unit of axes and tables.
    pub units: AxisUnit,
    /// Show the 95 % band.
    pub band: bool,
    /// The curve pane shows conductivity K(h) instead of theta(h).
    pub show_conductivity: bool,
    /// Model for the next refit.
    pub choice: ModelChoice,
    /// Text being typed, or a question.
    pub input: Input,
    /// Background fits.
    pub jobs: JobBoard,
    /// Status line.
    pub status: Status,
    /// Scroll of the help screen.
    pub help_scroll: u16,
    /// Terminal size (columns, rows).
    pub size: (u16, u16),
    /// Ticks seen (drives the busy spinner).
    pub ticks: u64,
    /// Colours and styles.
    pub theme: Theme,
    /// The user asked to quit.
    pub quit: bool,
}

impl AppState {
    /// The reading highlighted in the readings table and on the curve.
    pub fn selected_reading(&self) -> Option<&ReadingView> {
        self.detail.ready()?.readings.get(self.reading)
    }

    /// The measured K readings the readings pane lists instead of the retention readings:
    /// `Some` while the curve pane shows K(h) for a sample that has a conductivity view.
    pub fn k_readings(&self) -> Option<&[conductivity::KReadingView]> {
        if !self.show_conductivity {
            return None;
        }
        Some(&self.detail.ready()?.conductivity.as_ref()?.readings)
    }

    /// The measured K under the readings cursor in the K view.
    pub fn selected_k_reading(&self) -> Option<&conductivity::KReadingView> {
        self.k_readings()?.get(self.reading)
    }

    /// How many rows the readings cursor moves over: the K readings in the K view, else the
    /// retention readings.
    pub fn reading_rows(&self) -> usize {
        self.k_readings().map_or_else(
            || self.detail.ready().map_or(0, |d| d.readings.len()),
            <[_]>::len,
        )
    }

    /// Set a status message.
    pub fn say(&mut self, tone: Tone, text: impl Into<String>) {
        self.status = Status {
            text: text.into(),
            tone,
        };
    }

    /// The review item under the cursor.
    pub fn review_item(&self) -> Option<&ReviewItem> {
        self.review.items.get(self.review.cursor)
    }
}

/// Hand-made states for the tests of `update` and the views.
#[cfg(test)]
pub(crate) mod fixtures {
    use super::*;
    use crate::model::domain::LayerRef;
    use crate::store::outline::OutlineSite;

    /// Two sites, two layers each, two samples per layer (ids 1 to 8).
    pub(crate) fn outline() -> Outline {
        let mut o = Outline::default();
        let mut next = 1;
        for (si, code) in ["AA", "BB"].iter().enumerate() {
            o.sites.push(OutlineSite {
                id: si as i64 + 1,
                code: (*code).into(),
                name: Some(format!("Site {code}")),
            });
            for (li, (top, bottom)) in [(0.0, 20.0), (20.0, 50.0)].iter().enumerate() {
                let layer_id = (si * 10 + li) as i64 + 1;
                let at = LayerRef {
                    site: (*code).into(),
                    top_cm: *top,
                    bottom_cm: *bottom,
                };
                o.layers.push(OutlineLayer {
                    id: layer_id,
                    site_id: si as i64 + 1,
                    at: at.clone(),
                    horizon: Some(if li == 0 { "Ap" } else { "Bt" }.into()),
                    ks_cm_per_day: None,
                    texture: None,
                });
                for s in ["a", "b"] {
                    o.samples.push(SampleInfo {
                        id: next,
                        code: format!("{code}-{li}-{s}"),
                        layer_id,
                        layer: at.clone(),
                        kind: SampleKind::LabCore,
                        revision: 0,
                    });
                    next += 1;
                }
            }
        }
        o
    }

    /// The tree of [`outline`], nothing fitted, no flags.
    pub(crate) fn tree() -> Tree {
        Tree::from_outline(&outline(), &HashMap::new(), &HashMap::new())
    }

    /// A loaded sample with three readings (ids 10, 11, 12), the last one excluded.
    pub(crate) fn detail(id: i64, code: &str) -> SampleDetail {
        let reading = |rid: i64, h: f64, theta: f64, excluded: bool| ReadingView {
            id: rid,
            h_cm: h,
            theta,
            method: Some("sandbox".into()),
            branch: Branch::Unknown,
            residual: Some(0.001),
            studentized: Some(0.5),
            excluded,
            flag: excluded.then(|| FlagMark {
                id: 1,
                status: "accepted".into(),
                origin: "manual".into(),
                reason: "plate leak".into(),
                excludes: true,
            }),
        };
        SampleDetail {
            id,
            code: code.into(),
            site: code.split('-').next().unwrap_or("").into(),
            top_cm: 0.0,
            bottom_cm: 20.0,
            horizon: Some("Ap".into()),
            kind: SampleKind::LabCore,
            state: FitState::None,
            readings: vec![
                reading(10, 0.0, 0.42, false),
                reading(11, 100.0, 0.30, false),
                reading(12, 15000.0, 0.20, true),
            ],
            fit: None,
            curve: Vec::new(),
            band: Vec::new(),
            x_max: PLOT_X_MAX,
            fc_kpa: 33.0,
            pwp_kpa: 1500.0,
            conductivity: None,
        }
    }
}

#[cfg(test)]
mod tests {
    #![allow(clippy::float_cmp)]

    use super::fixtures::{outline, tree};
    use super::*;

    #[test]
    fn tree_starts_with_site_rows_and_opens_to_samples() {
        let mut tree = tree();
        assert_eq!(tree.sample_count(), outline().samples.len());
        assert_eq!(tree.rows, vec![TreeRow::Site(0), TreeRow::Site(1)]);
        assert!(tree.reveal(7));
        assert_eq!(
            tree.current_sample().map(|s| s.code.as_str()),
            Some("BB-1-a")
        );
        assert_eq!(tree.rows.len(), 2 + 2 + 4);
        assert!(tree.sample(3).is_some() && tree.sample(99).is_none());
    }

    #[test]
    fn filter_keeps_matching_samples_with_their_ancestors() {
        let mut tree = tree();
        tree.filter = "bt".into();
        tree.rebuild();
        // Both sites, only their Bt layers, both samples of each.
        assert_eq!(tree.rows.len(), 2 * (1 + 1 + 2));
        assert_eq!(tree.rows[0], TreeRow::Site(0));
        assert_eq!(tree.rows[1], TreeRow::Layer(0, 1));
        tree.filter = "BB-0-B".into();
        tree.rebuild();
        assert_eq!(
            tree.rows,
            vec![
                TreeRow::Site(1),
                TreeRow::Layer(1, 0),
                TreeRow::Sample(1, 0, 1)
            ]
        );
        tree.filter = "nothing like it".into();
        tree.rebuild();
        assert!(tree.rows.is_empty() && tree.current().is_none());
    }

    #[test]
    fn panes_and_units_cycle() {
        assert_eq!(Pane::Tree.cycle(1), Pane::Curve);
        assert_eq!(Pane::Tree.cycle(-1), Pane::Card);
        assert_eq!(AxisUnit::Pf.next(), AxisUnit::Cm);
        assert_eq!(plot_x(0.0), PLOT_X_MIN);
        assert!((plot_x(1000.0) - 3.0).abs() < 1e-12);
        assert_eq!(model_tag("brooks-corey"), "BC");
        assert_eq!(FitTag::of(&FitState::Stale(vec![])).glyph(), "~");
    }
}
