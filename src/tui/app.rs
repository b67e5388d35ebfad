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
use crate::model::domain::{Branch, SampleKind, SensorKind};
use crate::model::retention::ModelKind;
use crate::model::units::{CM_PER_KPA, SuctionUnit};
use crate::store::fits::{FitState, FitSummary, Ranking, SampleInfo, StoredFit};
use crate::store::outline::{Outline, OutlineLayer};
use crate::store::readings::StoredReading;

use super::theme::Theme;
use super::worker::JobBoard;

pub mod conductivity;
pub mod review;
pub mod series;
pub mod texture_fill;

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

/// A sample in the tree.
#[derive(Debug, Clone, PartialEq)]
pub struct SampleNode {
    /// Database id.
    pub id: i64,
    /// Code.
    pub code: String,
    /// Lab core or field pairing.
    pub kind: SampleKind,
    /// Model of the current fit.
    pub model: Option<String>,
    /// Fit standing.
    pub tag: FitTag,
    /// Live flags on its readings (suggested or accepted).
    pub flags: usize,
}

/// A layer in the tree.
#[derive(Debug, Clone, PartialEq)]
pub struct LayerNode {
    /// Database id.
    pub id: i64,
    /// Upper boundary, cm.
    pub top_cm: f64,
    /// Lower boundary, cm.
    pub bottom_cm: f64,
    /// Horizon label.
    pub horizon: Option<String>,
    /// USDA texture class, when sand, silt and clay are known.
    pub texture: Option<crate::model::texture::TextureClass>,
    /// Its samples, by code.
    pub samples: Vec<SampleNode>,
}

impl LayerNode {
    /// `0-20 cm`.
    pub fn depth_label(&self) -> String {
        format!("{}-{} cm", self.top_cm, self.bottom_cm)
    }
}

/// A site in the tree.
#[derive(Debug, Clone, PartialEq)]
pub struct SiteNode {
    /// Code.
    pub code: String,
    /// Descriptive name.
    pub name: Option<String>,
    /// Its layers, top down.
    pub layers: Vec<LayerNode>,
}

impl SiteNode {
    /// Every sample of the site.
    pub fn samples(&self) -> impl Iterator<Item = &SampleNode> {
        self.layers.iter().flat_map(|l| l.samples.iter())
    }
}

/// One visible line of the tree: indices into the sites, layers and samples.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum TreeRow {
    /// A site.
    Site(usize),
    /// A layer of a site.
    Layer(usize, usize),
    /// A sample of a layer.
    Sample(usize, usize, usize),
}

impl TreeRow {
    /// The site index.
    pub fn site(self) -> usize {
        match self {
            TreeRow::Site(s) | TreeRow::Layer(s, _) | TreeRow::Sample(s, _, _) => s,
        }
    }
}

/// A node that can be expanded: a site, or a layer of a site.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub enum NodeKey {
    /// Site index.
    Site(usize),
    /// Site and layer index.
    Layer(usize, usize),
}

/// The campaign tree: the outline, what is expanded, the filter and the cursor.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Tree {
    /// Sites by code.
    pub sites: Vec<SiteNode>,
    /// Expanded sites and layers (layers start expanded once their site is).
    pub expanded: BTreeSet<NodeKey>,
    /// Collapsed layers (so a site opens with its layers open).
    pub collapsed_layers: BTreeSet<NodeKey>,
    /// Text filter on codes, horizons and site names (case-insensitive); empty for none.
    pub filter: String,
    /// The visible rows, rebuilt whenever the outline, the expansion or the filter changes.
    pub rows: Vec<TreeRow>,
    /// Index into `rows`.
    pub cursor: usize,
}

impl Tree {
    /// Build the tree from the store's outline, fit summaries and flag counts.
    pub fn from_outline(
        outline: &Outline,
        summaries: &HashMap<i64, FitSummary>,
        flags: &HashMap<i64, usize>,
    ) -> Tree {
        let mut sites: Vec<SiteNode> = outline
            .sites
            .iter()
            .map(|s| SiteNode {
                code: s.code.clone(),
                name: s.name.clone(),
                layers: Vec::new(),
            })
            .collect();
        let site_index: HashMap<i64, usize> = outline
            .sites
            .iter()
            .enumerate()
            .map(|(i, s)| (s.id, i))
            .collect();
        let mut layer_index: HashMap<i64, (usize, usize)> = HashMap::new();
        for layer in &outline.layers {
            let Some(&si) = site_index.get(&layer.site_id) else {
                continue;
            };
            layer_index.insert(layer.id, (si, sites[si].layers.len()));
            sites[si].layers.push(LayerNode {
                id: layer.id,
                top_cm: layer.at.top_cm,
                bottom_cm: layer.at.bottom_cm,
                horizon: layer.horizon.clone(),
                texture: layer.texture,
                samples: Vec::new(),
            });
        }
        for sample in &outline.samples {
            let Some(&(si, li)) = layer_index.get(&sample.layer_id) else {
                continue;
            };
            let summary = summaries.get(&sample.id);
            sites[si].layers[li].samples.push(SampleNode {
                id: sample.id,
                code: sample.code.clone(),
                kind: sample.kind,
                model: summary.and_then(|s| s.model.clone()),
                tag: summary.map_or(FitTag::None, |s| FitTag::of(&s.state)),
                flags: flags.get(&sample.id).copied().unwrap_or(0),
            });
        }
        let mut tree = Tree {
            sites,
            ..Tree::default()
        };
        tree.rebuild();
        tree
    }

    /// Whether a row matches the filter (a site or layer matches when any sample below does).
    fn sample_matches(&self, site: &SiteNode, layer: &LayerNode, sample: &SampleNode) -> bool {
        if self.filter.is_empty() {
            return true;
        }
        let needle = self.filter.to_lowercase();
        let hay = [
            Some(sample.code.as_str()),
            layer.horizon.as_deref(),
            Some(site.code.as_str()),
            site.name.as_deref(),
            sample.model.as_deref(),
        ];
        hay.iter()
            .flatten()
            .any(|h| h.to_lowercase().contains(&needle))
    }

    /// Recompute the visible rows (keeping the cursor on the same node when it stays visible).
    pub fn rebuild(&mut self) {
        let keep = self.rows.get(self.cursor).copied();
        let filtering = !self.filter.is_empty();
        let mut rows = Vec::new();
        for (si, site) in self.sites.iter().enumerate() {
            let site_row = rows.len();
            let mut any = !filtering;
            let site_open = filtering || self.expanded.contains(&NodeKey::Site(si));
            if !filtering {
                rows.push(TreeRow::Site(si));
            }
            for (li, layer) in site.layers.iter().enumerate() {
                let matching: Vec<usize> = layer
                    .samples
                    .iter()
                    .enumerate()
                    .filter(|(_, s)| self.sample_matches(site, layer, s))
                    .map(|(i, _)| i)
                    .collect();
                if filtering && matching.is_empty() {
                    continue;
                }
                if filtering && !any {
                    rows.insert(site_row, TreeRow::Site(si));
                    any = true;
                }
                if !site_open {
                    continue;
                }
                rows.push(TreeRow::Layer(si, li));
                let layer_open =
                    filtering || !self.collapsed_layers.contains(&NodeKey::Layer(si, li));
                if layer_open {
                    rows.extend(matching.into_iter().map(|i| TreeRow::Sample(si, li, i)));
                }
            }
        }
        self.rows = rows;
        self.cursor = keep
            .and_then(|k| self.rows.iter().position(|r| *r == k))
            .unwrap_or_else(|| self.cursor.min(self.rows.len().saturating_sub(1)));
    }

    /// The row under the cursor.
    pub fn current(&self) -> Option<TreeRow> {
        self.rows.get(self.cursor).copied()
    }

    /// The sample under the cursor.
    pub fn current_sample(&self) -> Option<&SampleNode> {
        match self.current()? {
            TreeRow::Sample(s, l, i) => self.sites.get(s)?.layers.get(l)?.samples.get(i),
            _ => None,
        }
    }

    /// The site of the row under the cursor.
    pub fn current_site(&self) -> Option<&SiteNode> {
        self.sites.get(self.current()?.site())
    }

    /// Whether a site or layer row is open.
    pub fn is_open(&self, row: TreeRow) -> bool {
        match row {
            TreeRow::Site(s) => {
                !self.filter.is_empty() || self.expanded.contains(&NodeKey::Site(s))
            }
            TreeRow::Layer(s, l) => {
                !self.filter.is_empty() || !self.collapsed_layers.contains(&NodeKey::Layer(s, l))
            }
            TreeRow::Sample(..) => false,
        }
    }

    /// Where a sample sits, by id.
    pub fn find_sample(&self, id: i64) -> Option<(usize, usize, usize)> {
        for (si, site) in self.sites.iter().enumerate() {
            for (li, layer) in site.layers.iter().enumerate() {
                if let Some(i) = layer.samples.iter().position(|s| s.id == id) {
                    return Some((si, li, i));
                }
            }
        }
        None
    }

    /// The sample with this id.
    pub fn sample(&self, id: i64) -> Option<&SampleNode> {
        let (s, l, i) = self.find_sample(id)?;
        Some(&self.sites[s].layers[l].samples[i])
    }

    /// Open the way to a sample and put the cursor on it.
    pub fn reveal(&mut self, id: i64) -> bool {
        let Some((s, l, i)) = self.find_sample(id) else {
            return false;
        };
        self.expanded.insert(NodeKey::Site(s));
        self.collapsed_layers.remove(&NodeKey::Layer(s, l));
        self.rebuild();
        if let Some(pos) = self
            .rows
            .iter()
            .position(|r| *r == TreeRow::Sample(s, l, i))
        {
            self.cursor = pos;
            true
        } else {
            false
        }
    }

    /// Number of samples in the campaign.
    pub fn sample_count(&self) -> usize {
        self.sites.iter().map(|s| s.samples().count()).sum()
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

/// One line of the depth view's parameter table.
#[derive(Debug, Clone, PartialEq)]
pub struct DepthRow {
    /// Sample id.
    pub sample_id: i64,
    /// Sample code.
    pub sample: String,
    /// Lab core or field pairing.
    pub kind: SampleKind,
    /// Index of its layer in [`DepthData::layers`].
    pub layer: usize,
    /// Model of the current fit.
    pub model: Option<String>,
    /// Fit standing.
    pub tag: FitTag,
    /// theta_r (0 for models without one) and theta_s.
    pub theta_r: Option<f64>,
    /// theta_s.
    pub theta_s: Option<f64>,
    /// The model's other parameters.
    pub shape: Vec<(String, f64)>,
    /// Plant-available water, m3/m3.
    pub available_water: Option<f64>,
    /// Half the width of its 95 % interval, m3/m3, and whether that interval is a Monte Carlo
    /// one (the delta method in doubt for this fit).
    pub available_water_pm: Option<(f64, bool)>,
    /// Air-entry suction, cm.
    pub air_entry_cm: Option<f64>,
    /// RMSE, m3/m3.
    pub rmse: Option<f64>,
}

/// A layer of the depth view, with its curves.
#[derive(Debug, Clone, PartialEq)]
pub struct DepthLayer {
    /// Upper boundary, cm.
    pub top_cm: f64,
    /// Lower boundary, cm.
    pub bottom_cm: f64,
    /// Horizon label.
    pub horizon: Option<String>,
    /// The legend mark drawn along its curves (so the legend needs no colour).
    pub mark: char,
    /// Each fitted sample's curve.
    pub curves: Vec<LayerCurve>,
    /// Available water of its fitted lab cores (their random-effects mean), m3/m3.
    pub available_water: Option<f64>,
    /// Its 95 % interval, m3/m3.
    pub available_water_interval: Option<SumInterval>,
    /// Mean available water of its field pairings, m3/m3 (beside the lab mean, not summed).
    pub field_available_water: Option<f64>,
    /// Its part of the root zone, cm.
    pub depth_in_zone_cm: f64,
    /// Available water of that part, mm.
    pub water_mm: Option<f64>,
    /// Its 95 % interval, mm.
    pub water_mm_interval: Option<SumInterval>,
    /// Lab cores and fitted lab cores.
    pub lab_cores: usize,
    /// Fitted lab cores (the mean).
    pub fitted_cores: usize,
    /// Of those, stale.
    pub stale_cores: usize,
    /// USDA texture class, when sand, silt and clay are known.
    pub texture: Option<crate::model::texture::TextureClass>,
}

/// A fitted sample's curve in the depth view.
#[derive(Debug, Clone, PartialEq)]
pub struct LayerCurve {
    /// The sample.
    pub sample_id: i64,
    /// A field pairing (drawn dotted) rather than a lab core.
    pub field: bool,
    /// Points (log10 h, theta), left to right.
    pub points: Vec<(f64, f64)>,
}

/// Legend marks of the depth view's layers, top down.
pub const LAYER_MARKS: [char; 10] = ['1', '2', '3', '4', '5', '6', '7', '8', '9', '0'];

/// One site's depth view.
#[derive(Debug, Clone, PartialEq)]
pub struct DepthData {
    /// Site code.
    pub site: String,
    /// Site name.
    pub name: Option<String>,
    /// Root-zone depth of the sums, cm.
    pub root_zone_cm: f64,
    /// Layers top down.
    pub layers: Vec<DepthLayer>,
    /// Parameter table rows, top down.
    pub rows: Vec<DepthRow>,
    /// Profile available water down to the root-zone depth, mm.
    pub total_mm: f64,
    /// Its 95 % interval, mm (layers taken as independent).
    pub total_mm_interval: Option<SumInterval>,
    /// Why the total has no interval, when it has none.
    pub total_note: Option<String>,
    /// The campaign's pooled between-core variance the layer intervals use.
    pub between_cores: Option<BetweenCores>,
    /// Root-zone depth with no fitted layer, cm (the total is a lower bound then).
    pub uncovered_cm: f64,
    /// FC and PWP suctions, kPa.
    pub fc_kpa: f64,
    /// Wilting point, kPa.
    pub pwp_kpa: f64,
    /// The profile with layers without a fitted core filled from their texture class, shown
    /// instead of the measured one when the user asks (key `e`); `None` when no layer has an
    /// estimate.
    pub texture_fill: Option<texture_fill::TextureFill>,
}

impl DepthData {
    /// Gather the depth view of a site from its current fits and its profile.
    pub fn from_parts(
        site: &str,
        name: Option<String>,
        fits: &[SampleFit],
        profile: Option<&SiteProfile>,
        root_zone_cm: f64,
    ) -> DepthData {
        let mut layers: Vec<DepthLayer> = Vec::new();
        let mut rows = Vec::new();
        let mut layer_of: Vec<(f64, f64)> = Vec::new();
        for fit in fits {
            let key = (fit.sample.layer.top_cm, fit.sample.layer.bottom_cm);
            let li = if let Some(i) = layer_of.iter().position(|k| *k == key) {
                i
            } else {
                let water = profile.and_then(|p| {
                    p.layers.iter().find(|l| {
                        (l.layer.top_cm - key.0).abs() < 1e-9
                            && (l.layer.bottom_cm - key.1).abs() < 1e-9
                    })
                });
                layers.push(DepthLayer {
                    top_cm: key.0,
                    bottom_cm: key.1,
                    horizon: water.and_then(|w| w.horizon.clone()),
                    mark: LAYER_MARKS[layers.len() % LAYER_MARKS.len()],
                    curves: Vec::new(),
                    available_water: water.and_then(|w| w.available_water),
                    available_water_interval: water.and_then(|w| w.available_water_interval),
                    field_available_water: water.and_then(|w| w.field_available_water),
                    depth_in_zone_cm: water.map_or(0.0, |w| w.depth_in_zone_cm),
                    water_mm: water.and_then(|w| w.water_mm),
                    water_mm_interval: water.and_then(|w| w.water_mm_interval),
                    lab_cores: water.map_or(0, |w| w.lab_cores),
                    fitted_cores: water.map_or(0, |w| w.fitted_cores),
                    stale_cores: water.map_or(0, |w| w.stale_cores),
                    texture: water.and_then(|w| w.texture),
                });
                layer_of.push(key);
                layers.len() - 1
            };
            let report = fit.fit.as_ref().and_then(|f| f.report.as_ref());
            if let Some(stored) = &fit.fit {
                let (points, _) = curve_points(stored, PLOT_X_MAX);
                if !points.is_empty() {
                    layers[li].curves.push(LayerCurve {
                        sample_id: fit.sample.id,
                        field: fit.sample.kind == SampleKind::FieldPairing,
                        points,
                    });
                }
            }
            let curve = report.and_then(crate::analysis::water::curve_of);
            let (theta_r, theta_s) = curve.as_ref().map_or((None, None), |c| {
                let (r, s) = c.theta_range();
                (Some(r), Some(s))
            });
            let shape = report
                .map(|r| {
                    r.parameters
                        .iter()
                        .filter(|p| p.name != "theta_r" && p.name != "theta_s")
                        .map(|p| (p.name.clone(), p.value))
                        .collect()
                })
                .unwrap_or_default();
            let values = fit.derived.as_ref().map(|d| &d.values);
            rows.push(DepthRow {
                sample_id: fit.sample.id,
                sample: fit.sample.code.clone(),
                kind: fit.sample.kind,
                layer: li,
                model: fit.fit.as_ref().map(|f| f.model.clone()),
                tag: FitTag::of(&fit.state),
                theta_r,
                theta_s,
                shape,
                available_water: values.and_then(|v| v.plant_available_water),
                available_water_pm: fit
                    .derived
                    .as_ref()
                    .and_then(|d| d.intervals.plant_available_water.as_ref())
                    .map(|i| {
                        (
                            i.half_width(),
                            i.method == crate::fit::IntervalMethod::MonteCarlo,
                        )
                    }),
                air_entry_cm: values.and_then(|v| v.air_entry.map(|a| a.suction_cm)),
                rmse: report.map(|r| r.rmse),
            });
        }
        DepthData {
            site: site.to_string(),
            name,
            root_zone_cm,
            layers,
            rows,
            total_mm: profile.map_or(0.0, |p| p.total_mm),
            total_mm_interval: profile.and_then(|p| p.total_mm_interval),
            total_note: profile.and_then(|p| p.total_note.clone()),
            between_cores: profile.and_then(|p| p.between_cores),
            uncovered_cm: profile.map_or(root_zone_cm, SiteProfile::uncovered_cm),
            fc_kpa: profile.map_or(crate::store::campaign::DEFAULT_FC_KPA, |p| p.fc_kpa),
            pwp_kpa: profile.map_or(crate::store::campaign::DEFAULT_PWP_KPA, |p| p.pwp_kpa),
            texture_fill: profile.and_then(texture_fill::TextureFill::of),
        }
    }
}

/// The depth screen: which site, the root-zone depth, the loaded view and the table cursor.
#[derive(Debug, Clone, PartialEq)]
pub struct DepthState {
    /// Site code shown.
    pub site: Option<String>,
    /// Depth the profile's available water is summed to, cm.
    pub root_zone_cm: f64,
    /// The loaded view (for `site` and `root_zone_cm`).
    pub data: Option<DepthData>,
    /// Row of the parameter table.
    pub cursor: usize,
    /// Show layers without a fitted core filled with their texture estimate (key `e`).
    pub fill_texture: bool,
}

impl Default for DepthState {
    fn default() -> Self {
        Self {
            site: None,
            root_zone_cm: crate::analysis::water::DEFAULT_ROOT_ZONE_CM,
            data: None,
            cursor: 0,
            fill_texture: false,
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
        use crate::model::domain::FlagTarget;
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
        /// The reading.
        reading_id: i64,
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
