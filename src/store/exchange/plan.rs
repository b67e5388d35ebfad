//! Planning a merge: pure comparison of two campaigns' rows by uid (logger records by their
//! natural key), with the user's preferences deciding conflicts.

use std::cmp::Ordering;
use std::collections::{BTreeMap, HashMap, HashSet};
use std::fmt::Write as _;

use serde::Serialize;

use super::{
    BatchRow, CampaignRow, CampaignRows, ConductivityRow, FitRow, FlagEventRow, FlagRow,
    FlagTarget, LayerRow, LoggerPoint, LoggerSeries, ReadingRow, SampleRow, SiteRow,
};
use crate::model::text::shown;

/// The kinds of rows a merge brings, in the order they are written.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash, Serialize)]
pub enum RowKind {
    /// The campaign's settings.
    Campaign,
    /// Import batches.
    Batches,
    /// Sites.
    Sites,
    /// Layers.
    Layers,
    /// Samples.
    Samples,
    /// Retention readings.
    Readings,
    /// Conductivity readings.
    Conductivity,
    /// Logger records.
    Logger,
    /// Flags.
    Flags,
    /// Flag events (the audit trail).
    FlagEvents,
    /// Fits (and each sample's choice of current fit).
    Fits,
}

impl RowKind {
    /// Every kind, in write order.
    pub const ALL: [RowKind; 11] = [
        RowKind::Campaign,
        RowKind::Batches,
        RowKind::Sites,
        RowKind::Layers,
        RowKind::Samples,
        RowKind::Readings,
        RowKind::Conductivity,
        RowKind::Logger,
        RowKind::Flags,
        RowKind::FlagEvents,
        RowKind::Fits,
    ];

    /// The name used in reports and in `--prefer KIND=WAY`.
    pub fn name(self) -> &'static str {
        match self {
            RowKind::Campaign => "campaign",
            RowKind::Batches => "batches",
            RowKind::Sites => "sites",
            RowKind::Layers => "layers",
            RowKind::Samples => "samples",
            RowKind::Readings => "readings",
            RowKind::Conductivity => "conductivity",
            RowKind::Logger => "logger",
            RowKind::Flags => "flags",
            RowKind::FlagEvents => "flag-events",
            RowKind::Fits => "fits",
        }
    }

    /// The kind named `name` (as [`RowKind::name`]).
    pub fn parse(name: &str) -> Option<RowKind> {
        RowKind::ALL.into_iter().find(|k| k.name() == name)
    }
}

/// How to resolve a conflict: the later version, INTO's, or FROM's.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub enum Way {
    /// The version changed later (flags: decided later; fits: made later). Kinds without a
    /// time of change cannot be resolved this way.
    Newer,
    /// Keep the campaign merged into.
    Into,
    /// Take the campaign merged from.
    From,
}

impl Way {
    /// The name used in `--prefer`.
    pub fn name(self) -> &'static str {
        match self {
            Way::Newer => "newer",
            Way::Into => "into",
            Way::From => "from",
        }
    }

    fn parse(name: &str) -> Option<Way> {
        match name {
            "newer" => Some(Way::Newer),
            "into" => Some(Way::Into),
            "from" => Some(Way::From),
            _ => None,
        }
    }
}

/// The user's preferences: a way for every kind, ways per kind, and whether another campaign
/// (another campaign uid) may be merged at all.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Preferences {
    /// The way for kinds not named in `per_kind`.
    pub all: Option<Way>,
    /// Ways per kind.
    pub per_kind: BTreeMap<RowKind, Way>,
    /// Merge even when the two files are different campaigns (different campaign uids).
    pub allow_other_campaign: bool,
}

impl Preferences {
    /// Add one `--prefer` value: `WAY` for every kind or `KIND=WAY`.
    ///
    /// # Errors
    /// A text naming an unknown kind or way; the message lists the known ones.
    pub fn add(&mut self, text: &str) -> Result<(), String> {
        let ways = "newer, into or from";
        match text.split_once('=') {
            None => {
                let way = Way::parse(text)
                    .ok_or_else(|| format!("--prefer {text:?}: expected {ways}, or KIND=WAY"))?;
                self.all = Some(way);
            }
            Some((kind, way)) => {
                let kinds: Vec<&str> = RowKind::ALL.iter().map(|k| k.name()).collect();
                let kind = RowKind::parse(kind).ok_or_else(|| {
                    format!(
                        "--prefer {text:?}: unknown kind {kind:?} (kinds: {})",
                        kinds.join(", ")
                    )
                })?;
                let way = Way::parse(way)
                    .ok_or_else(|| format!("--prefer {text:?}: expected {ways} after '='"))?;
                self.per_kind.insert(kind, way);
            }
        }
        Ok(())
    }

    /// The way chosen for `kind`, if any.
    pub fn way(&self, kind: RowKind) -> Option<Way> {
        self.per_kind.get(&kind).copied().or(self.all)
    }
}

/// Which version a conflict ends with.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub enum Side {
    /// INTO's version stays.
    Into,
    /// FROM's version is written.
    From,
}

/// One row with the same identity and different content in the two campaigns.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Conflict {
    /// The kind of row.
    pub kind: RowKind,
    /// Which row (codes, depths and uid).
    pub what: String,
    /// The fields that differ: name, INTO's value, FROM's value (as JSON text).
    pub fields: Vec<(String, String, String)>,
    /// How it was resolved (None: not resolved, the merge writes nothing).
    pub resolved: Option<(Side, Way)>,
    /// Why a preference given did not resolve it.
    pub unresolved_because: Option<String>,
}

/// Two different rows (different uids) that claim the same code or place.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct Collision {
    /// The kind of row.
    pub kind: RowKind,
    /// What they share (`code "S1"`, `depth 0-20 cm of site S1`).
    pub key: String,
    /// The row's uid in INTO.
    pub into_uid: String,
    /// The other row's uid in FROM.
    pub from_uid: String,
}

/// What a merge does with one kind of row.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq, Serialize)]
pub struct KindCounts {
    /// Rows only FROM has (written).
    pub new: usize,
    /// Rows both have, the same.
    pub identical: usize,
    /// Rows both have, different.
    pub conflicting: usize,
    /// Conflicts resolved by keeping INTO's version.
    pub kept_into: usize,
    /// Conflicts resolved by writing FROM's version.
    pub took_from: usize,
}

/// Rows of several kinds: what a plan inserts, or what it writes over INTO's version.
#[derive(Debug, Clone, Default, PartialEq, Serialize)]
pub struct RowSet {
    /// Import batches.
    pub batches: Vec<BatchRow>,
    /// Sites.
    pub sites: Vec<SiteRow>,
    /// Layers.
    pub layers: Vec<LayerRow>,
    /// Samples.
    pub samples: Vec<SampleRow>,
    /// Retention readings.
    pub readings: Vec<ReadingRow>,
    /// Conductivity readings.
    pub conductivity: Vec<ConductivityRow>,
    /// Logger records (only the records to write in each series).
    pub logger: Vec<LoggerSeries>,
    /// Flags.
    pub flags: Vec<FlagRow>,
    /// Flag events.
    pub flag_events: Vec<FlagEventRow>,
    /// Fits.
    pub fits: Vec<FitRow>,
}

/// What merging one campaign into another does: counts, conflicts, collisions, and the rows
/// to write. Built by [`plan`] (pure); written by [`super::apply()`].
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct MergePlan {
    /// Counts per kind, in write order.
    pub counts: BTreeMap<RowKind, KindCounts>,
    /// Every conflict, resolved or not, in write order of kinds.
    pub conflicts: Vec<Conflict>,
    /// Code collisions (never resolved by preferences).
    pub collisions: Vec<Collision>,
    /// Why the merge is refused as a whole (different campaigns).
    pub refusal: Option<String>,
    /// Rows to insert.
    pub insert: RowSet,
    /// Rows whose FROM version is written over INTO's (matched by uid or natural key).
    pub replace: RowSet,
    /// The campaign row to write (settings taken from FROM; the uid too when recreating).
    pub campaign: Option<CampaignRow>,
    /// Samples whose current fit becomes this fit (sample uid, fit uid).
    pub current: Vec<(String, String)>,
}

impl MergePlan {
    /// Whether the plan can be applied: no refusal, no collision, every conflict resolved.
    pub fn is_clean(&self) -> bool {
        self.refusal.is_none()
            && self.collisions.is_empty()
            && self.conflicts.iter().all(|c| c.resolved.is_some())
    }

    /// Conflicts no preference resolved.
    pub fn unresolved(&self) -> usize {
        self.conflicts
            .iter()
            .filter(|c| c.resolved.is_none())
            .count()
    }

    /// Whether the plan writes nothing.
    pub fn writes_nothing(&self) -> bool {
        self.insert == RowSet::default()
            && self.replace == RowSet::default()
            && self.campaign.is_none()
            && self.current.is_empty()
    }

    /// The report: a table of counts per kind, then every conflict with both versions and
    /// how it was resolved, then every collision. User text goes through `shown`.
    pub fn render(&self) -> String {
        let mut out = String::new();
        if let Some(refusal) = &self.refusal {
            let _ = writeln!(out, "refused: {}", shown(refusal));
        }
        let _ = writeln!(
            out,
            "{:<13} {:>9} {:>10} {:>12} {:>10} {:>10}",
            "kind", "new", "identical", "conflicting", "kept INTO", "took FROM"
        );
        for (kind, c) in &self.counts {
            let _ = writeln!(
                out,
                "{:<13} {:>9} {:>10} {:>12} {:>10} {:>10}",
                kind.name(),
                c.new,
                c.identical,
                c.conflicting,
                c.kept_into,
                c.took_from
            );
        }
        if !self.conflicts.is_empty() {
            let _ = writeln!(out, "conflicts:");
            for c in &self.conflicts {
                let _ = writeln!(out, "  {}: {}", c.kind.name(), shown(&c.what));
                for (field, a, b) in &c.fields {
                    let _ = writeln!(out, "    {field}: INTO {} | FROM {}", shown(a), shown(b));
                }
                let verdict = match (c.resolved, &c.unresolved_because) {
                    (Some((Side::Into, way)), _) => {
                        format!("kept INTO's (--prefer {}={})", c.kind.name(), way.name())
                    }
                    (Some((Side::From, way)), _) => {
                        format!("took FROM's (--prefer {}={})", c.kind.name(), way.name())
                    }
                    (None, Some(why)) => format!("not resolved: {why}"),
                    (None, None) => format!(
                        "not resolved: choose with --prefer {}=newer|into|from",
                        c.kind.name()
                    ),
                };
                let _ = writeln!(out, "    -> {verdict}");
            }
        }
        if !self.collisions.is_empty() {
            let _ = writeln!(
                out,
                "code collisions (two different rows, never merged; rename or remove one in its \
                 file first):"
            );
            for c in &self.collisions {
                let _ = writeln!(
                    out,
                    "  {}: {} is {} in INTO and {} in FROM",
                    c.kind.name(),
                    shown(&c.key),
                    c.into_uid,
                    c.from_uid
                );
            }
        }
        out
    }
}

/// Labels of rows for the report, from both campaigns (INTO's first).
struct Labels<'a> {
    site_code: HashMap<&'a str, &'a str>,
    layer: HashMap<&'a str, (&'a str, f64, f64)>,
    sample_code: HashMap<&'a str, &'a str>,
    reading: HashMap<&'a str, (&'a str, f64)>,
}

impl<'a> Labels<'a> {
    fn new(into: &'a CampaignRows, from: &'a CampaignRows) -> Self {
        let mut l = Labels {
            site_code: HashMap::new(),
            layer: HashMap::new(),
            sample_code: HashMap::new(),
            reading: HashMap::new(),
        };
        for rows in [from, into] {
            for s in &rows.sites {
                l.site_code.insert(&s.uid, &s.code);
            }
            for y in &rows.layers {
                l.layer
                    .insert(&y.uid, (y.site_uid.as_str(), y.top_cm, y.bottom_cm));
            }
            for s in &rows.samples {
                l.sample_code.insert(&s.uid, &s.code);
            }
            for r in &rows.readings {
                l.reading.insert(&r.uid, (r.sample_uid.as_str(), r.h_cm));
            }
        }
        l
    }

    fn site(&self, uid: &str) -> String {
        self.site_code
            .get(uid)
            .map_or_else(|| uid.to_string(), |c| (*c).to_string())
    }

    fn sample(&self, uid: &str) -> String {
        self.sample_code
            .get(uid)
            .map_or_else(|| uid.to_string(), |c| (*c).to_string())
    }

    fn layer(&self, uid: &str) -> String {
        self.layer.get(uid).map_or_else(
            || uid.to_string(),
            |(site, top, bottom)| format!("{}:{top}-{bottom} cm", self.site(site)),
        )
    }

    fn target(&self, target: &FlagTarget) -> String {
        match target {
            FlagTarget::Reading(uid) => self.reading.get(uid.as_str()).map_or_else(
                || format!("reading {uid}"),
                |(sample, h)| format!("reading of sample {} at {h} cm", self.sample(sample)),
            ),
            FlagTarget::Logger(k) => format!(
                "logger record {}/{} at {}",
                self.site(&k.site_uid),
                k.sensor_id,
                k.time
            ),
            FlagTarget::Conductivity(uid) => format!("conductivity reading {uid}"),
        }
    }
}

/// The fields of two rows that differ, as JSON text, by serialising both.
fn differences<T: Serialize>(a: &T, b: &T, ignore: &[&str]) -> Vec<(String, String, String)> {
    let a = serde_json::to_value(a).unwrap_or_default();
    let b = serde_json::to_value(b).unwrap_or_default();
    let (Some(a), Some(b)) = (a.as_object(), b.as_object()) else {
        return Vec::new();
    };
    a.iter()
        .filter(|(k, _)| !ignore.contains(&k.as_str()))
        .filter_map(|(k, va)| {
            let vb = b.get(k).cloned().unwrap_or_default();
            (*va != vb).then(|| (k.clone(), va.to_string(), vb.to_string()))
        })
        .collect()
}

/// Two versions of a row that differ without being a conflict: the side to keep.
type Settle<'r, T> = dyn Fn(&T, &T) -> Option<Side> + 'r;

/// How one kind of uid-keyed row is compared and labelled.
struct KindRules<'r, T> {
    kind: RowKind,
    uid: fn(&T) -> &str,
    /// Fields that are derived state, left out of the comparison.
    ignore: &'r [&'r str],
    /// Which version changed later (None: the kind has no time of change).
    newer: Option<fn(&T, &T) -> Ordering>,
    /// Why `newer` cannot decide this kind (when `newer` is None).
    no_time: &'r str,
    label: &'r dyn Fn(&T) -> String,
    /// Never resolved by preferences (the append-only audit trail).
    fixed: bool,
    /// Two versions that differ without being a conflict, and the side to keep (flags: a
    /// suggestion the checks refreshed on one laptop, or decided on one and still open on the
    /// other).
    settle: Option<&'r Settle<'r, T>>,
}

/// Two versions of one flag that are not a conflict: the checks refresh an open suggestion's
/// reason and score each time they run, so two open suggestions that differ only there keep
/// INTO's; and a suggestion decided on one laptop and still open on the other takes the
/// decision (its audit events come with it). Two different decisions are a conflict.
fn settle_flags(into: &FlagRow, from: &FlagRow) -> Option<Side> {
    let open = |f: &FlagRow| f.status == "suggested" && f.origin == "auto";
    let same_flag = into.target == from.target
        && into.origin == from.origin
        && into.rule == from.rule
        && into.created_at == from.created_at;
    if !same_flag {
        return None;
    }
    match (open(into), open(from)) {
        (true, true) => (into.note == from.note).then_some(Side::Into),
        (true, false) => Some(Side::From),
        (false, true) => Some(Side::Into),
        (false, false) => None,
    }
}

impl<'r, T> KindRules<'r, T> {
    /// The rules of a kind compared field by field, with no time of change, nothing left out
    /// and nothing settled on its own.
    fn plain(kind: RowKind, uid: fn(&T) -> &str, label: &'r dyn Fn(&T) -> String) -> Self {
        KindRules {
            kind,
            uid,
            ignore: &[],
            newer: None,
            no_time: NO_TIME,
            label,
            fixed: false,
            settle: None,
        }
    }
}

/// Resolve one conflict with the preferences.
fn resolve(
    kind: RowKind,
    prefs: &Preferences,
    newer: Option<Ordering>,
    no_time: &str,
    fixed: bool,
) -> (Option<(Side, Way)>, Option<String>) {
    if fixed {
        return (
            None,
            Some("the flag audit trail is append-only; no preference rewrites an event".into()),
        );
    }
    match prefs.way(kind) {
        None => (None, None),
        Some(Way::Into) => (Some((Side::Into, Way::Into)), None),
        Some(Way::From) => (Some((Side::From, Way::From)), None),
        Some(Way::Newer) => match newer {
            Some(Ordering::Less) => (Some((Side::From, Way::Newer)), None),
            Some(Ordering::Greater) => (Some((Side::Into, Way::Newer)), None),
            Some(Ordering::Equal) => (
                None,
                Some("both versions carry the same time; choose into or from".into()),
            ),
            None => (None, Some(no_time.to_string())),
        },
    }
}

fn merge_kind<T: Serialize + Clone + PartialEq>(
    rules: &KindRules<'_, T>,
    into: &[T],
    from: &[T],
    prefs: &Preferences,
    plan: &mut MergePlan,
) -> (Vec<T>, Vec<T>) {
    let by_uid: HashMap<&str, &T> = into.iter().map(|r| ((rules.uid)(r), r)).collect();
    let mut counts = KindCounts::default();
    let mut insert = Vec::new();
    let mut replace = Vec::new();
    for row in from {
        let Some(mine) = by_uid.get((rules.uid)(row)) else {
            counts.new += 1;
            insert.push(row.clone());
            continue;
        };
        // Equal rows are the common case: compare fields only when the rows differ.
        if *mine == row {
            counts.identical += 1;
            continue;
        }
        let fields = differences(*mine, row, rules.ignore);
        if fields.is_empty() {
            counts.identical += 1;
            continue;
        }
        match rules.settle.and_then(|settle| settle(mine, row)) {
            Some(Side::Into) => {
                counts.kept_into += 1;
                continue;
            }
            Some(Side::From) => {
                counts.took_from += 1;
                replace.push(row.clone());
                continue;
            }
            None => {}
        }
        counts.conflicting += 1;
        let order = rules.newer.map(|f| f(mine, row));
        let (resolved, because) = resolve(rules.kind, prefs, order, rules.no_time, rules.fixed);
        match resolved {
            Some((Side::Into, _)) => counts.kept_into += 1,
            Some((Side::From, _)) => {
                counts.took_from += 1;
                replace.push(row.clone());
            }
            None => {}
        }
        plan.conflicts.push(Conflict {
            kind: rules.kind,
            what: (rules.label)(mine),
            fields,
            resolved,
            unresolved_because: because,
        });
    }
    plan.counts.insert(rules.kind, counts);
    (insert, replace)
}

const NO_TIME: &str =
    "these rows carry no time of change, so `newer` cannot choose; use into or from";

/// Plan merging `from` into `into` with the user's `prefs`. Pure: reads nothing else.
#[allow(clippy::too_many_lines)]
pub fn plan(into: &CampaignRows, from: &CampaignRows, prefs: &Preferences) -> MergePlan {
    let mut plan = MergePlan {
        counts: BTreeMap::new(),
        conflicts: Vec::new(),
        collisions: Vec::new(),
        refusal: None,
        insert: RowSet::default(),
        replace: RowSet::default(),
        campaign: None,
        current: Vec::new(),
    };
    let labels = Labels::new(into, from);

    // The campaign: the same one (uid), and its settings.
    if into.campaign.uid != from.campaign.uid && !prefs.allow_other_campaign {
        plan.refusal = Some(format!(
            "the files are two different campaigns ({} {} and {} {}); merge them anyway with \
             --other-campaign",
            into.campaign.name, into.campaign.uid, from.campaign.name, from.campaign.uid
        ));
    }
    let mut counts = KindCounts::default();
    let fields = differences(&into.campaign, &from.campaign, &["uid"]);
    if fields.is_empty() {
        counts.identical = 1;
    } else {
        counts.conflicting = 1;
        let (resolved, because) = resolve(RowKind::Campaign, prefs, None, NO_TIME, false);
        match resolved {
            Some((Side::From, _)) => {
                counts.took_from = 1;
                plan.campaign = Some(CampaignRow {
                    uid: into.campaign.uid.clone(),
                    ..from.campaign.clone()
                });
            }
            Some((Side::Into, _)) => counts.kept_into = 1,
            None => {}
        }
        plan.conflicts.push(Conflict {
            kind: RowKind::Campaign,
            what: format!("campaign {} ({})", into.campaign.name, into.campaign.uid),
            fields,
            resolved,
            unresolved_because: because,
        });
    }
    plan.counts.insert(RowKind::Campaign, counts);

    let (i, r) = merge_kind(
        &KindRules::plain(RowKind::Batches, |r: &BatchRow| &r.uid, &|r: &BatchRow| {
            format!("import batch {} ({})", r.file_name, r.uid)
        }),
        &into.batches,
        &from.batches,
        prefs,
        &mut plan,
    );
    (plan.insert.batches, plan.replace.batches) = (i, r);

    let (i, r) = merge_kind(
        &KindRules::plain(RowKind::Sites, |r: &SiteRow| &r.uid, &|r: &SiteRow| {
            format!("site {} ({})", r.code, r.uid)
        }),
        &into.sites,
        &from.sites,
        prefs,
        &mut plan,
    );
    (plan.insert.sites, plan.replace.sites) = (i, r);

    let (i, r) = merge_kind(
        &KindRules::plain(RowKind::Layers, |r: &LayerRow| &r.uid, &|r: &LayerRow| {
            format!("layer {} ({})", labels.layer(&r.uid), r.uid)
        }),
        &into.layers,
        &from.layers,
        prefs,
        &mut plan,
    );
    (plan.insert.layers, plan.replace.layers) = (i, r);

    let (i, r) = merge_kind(
        &KindRules::plain(
            RowKind::Samples,
            |r: &SampleRow| &r.uid,
            &|r: &SampleRow| format!("sample {} ({})", r.code, r.uid),
        ),
        &into.samples,
        &from.samples,
        prefs,
        &mut plan,
    );
    (plan.insert.samples, plan.replace.samples) = (i, r);

    let (i, r) = merge_kind(
        &KindRules::plain(
            RowKind::Readings,
            |r: &ReadingRow| &r.uid,
            &|r: &ReadingRow| {
                format!(
                    "reading of sample {} at {} cm ({})",
                    labels.sample(&r.sample_uid),
                    r.h_cm,
                    r.uid
                )
            },
        ),
        &into.readings,
        &from.readings,
        prefs,
        &mut plan,
    );
    (plan.insert.readings, plan.replace.readings) = (i, r);

    let (i, r) = merge_kind(
        &KindRules::plain(
            RowKind::Conductivity,
            |r: &ConductivityRow| &r.uid,
            &|r: &ConductivityRow| {
                format!(
                    "conductivity reading of sample {} ({})",
                    labels.sample(&r.sample_uid),
                    r.uid
                )
            },
        ),
        &into.conductivity,
        &from.conductivity,
        prefs,
        &mut plan,
    );
    (plan.insert.conductivity, plan.replace.conductivity) = (i, r);

    merge_logger(into, from, prefs, &labels, &mut plan);

    // A flag whose audit trail on one side holds every event of the other's was decided
    // again on the copy that had seen the earlier decision (a pulled copy, say): that side is
    // the later state, not a conflict. Otherwise `settle_flags` decides.
    let events_of = |rows: &'_ CampaignRows| {
        let mut map: HashMap<String, HashSet<String>> = HashMap::new();
        for e in &rows.flag_events {
            map.entry(e.flag_uid.clone())
                .or_default()
                .insert(e.uid.clone());
        }
        map
    };
    let (into_events, from_events) = (events_of(into), events_of(from));
    let none = HashSet::new();
    let settle = |a: &FlagRow, b: &FlagRow| -> Option<Side> {
        let ea = into_events.get(&a.uid).unwrap_or(&none);
        let eb = from_events.get(&b.uid).unwrap_or(&none);
        if ea != eb {
            if eb.is_superset(ea) {
                return Some(Side::From);
            }
            if ea.is_superset(eb) {
                return Some(Side::Into);
            }
        }
        settle_flags(a, b)
    };
    let (i, r) = merge_kind(
        &KindRules {
            newer: Some(|a: &FlagRow, b: &FlagRow| {
                let at = |f: &FlagRow| f.decided_at.clone().unwrap_or_else(|| f.created_at.clone());
                at(a).cmp(&at(b))
            }),
            settle: Some(&settle),
            ..KindRules::plain(RowKind::Flags, |r: &FlagRow| &r.uid, &|r: &FlagRow| {
                format!(
                    "flag {:?} on {} ({})",
                    r.reason,
                    labels.target(&r.target),
                    r.uid
                )
            })
        },
        &into.flags,
        &from.flags,
        prefs,
        &mut plan,
    );
    (plan.insert.flags, plan.replace.flags) = (i, r);

    let (i, _) = merge_kind(
        &KindRules {
            fixed: true,
            ..KindRules::plain(
                RowKind::FlagEvents,
                |r: &FlagEventRow| &r.uid,
                &|r: &FlagEventRow| format!("flag event {} of flag {}", r.uid, r.flag_uid),
            )
        },
        &into.flag_events,
        &from.flag_events,
        prefs,
        &mut plan,
    );
    plan.insert.flag_events = i;

    // Fits never change once made, except which one is current (decided per sample below);
    // whether one still matches its readings is the target file's to tell.
    let (i, r) = merge_kind(
        &KindRules {
            ignore: &["is_current", "readings_key", "joint"],
            newer: Some(|a: &FitRow, b: &FitRow| a.created_at.cmp(&b.created_at)),
            ..KindRules::plain(RowKind::Fits, |r: &FitRow| &r.uid, &|r: &FitRow| {
                format!(
                    "fit {} of sample {} ({})",
                    r.model,
                    labels.sample(&r.sample_uid),
                    r.uid
                )
            })
        },
        &into.fits,
        &from.fits,
        prefs,
        &mut plan,
    );
    (plan.insert.fits, plan.replace.fits) = (i, r);
    merge_current(into, from, prefs, &labels, &mut plan);

    collisions(into, &mut plan, &labels);
    plan
}

/// Each sample's current fit: FROM's choice is taken where INTO has none; two different
/// choices are a conflict of kind `fits`.
fn merge_current(
    into: &CampaignRows,
    from: &CampaignRows,
    prefs: &Preferences,
    labels: &Labels<'_>,
    plan: &mut MergePlan,
) {
    let current = |rows: &CampaignRows| -> BTreeMap<String, FitRow> {
        rows.fits
            .iter()
            .filter(|f| f.is_current)
            .map(|f| (f.sample_uid.clone(), f.clone()))
            .collect()
    };
    let mine = current(into);
    for (sample, theirs) in current(from) {
        match mine.get(&sample) {
            None => plan.current.push((sample, theirs.uid)),
            Some(m) if m.uid == theirs.uid => {}
            Some(m) => {
                let order = m.created_at.cmp(&theirs.created_at);
                let (resolved, because) =
                    resolve(RowKind::Fits, prefs, Some(order), NO_TIME, false);
                let counts = plan.counts.entry(RowKind::Fits).or_default();
                counts.conflicting += 1;
                match resolved {
                    Some((Side::From, _)) => {
                        counts.took_from += 1;
                        plan.current.push((sample.clone(), theirs.uid.clone()));
                    }
                    Some((Side::Into, _)) => counts.kept_into += 1,
                    None => {}
                }
                let describe = |f: &FitRow| format!("{} {} made {}", f.model, f.uid, f.created_at);
                plan.conflicts.push(Conflict {
                    kind: RowKind::Fits,
                    what: format!("current fit of sample {}", labels.sample(&sample)),
                    fields: vec![("current".into(), describe(m), describe(&theirs))],
                    resolved,
                    unresolved_because: because,
                });
            }
        }
    }
}

/// Logger records: a merge-join of each sensor's records by time. Content (depth, sensor
/// kind, value) decides identity; the import they came from is provenance and not compared.
fn merge_logger(
    into: &CampaignRows,
    from: &CampaignRows,
    prefs: &Preferences,
    labels: &Labels<'_>,
    plan: &mut MergePlan,
) {
    let by_key: HashMap<(&str, &str), &LoggerSeries> = into
        .logger
        .iter()
        .map(|s| ((s.site_uid.as_str(), s.sensor_id.as_str()), s))
        .collect();
    let mut counts = KindCounts::default();
    let part = |s: &LoggerSeries, points: Vec<LoggerPoint>| LoggerSeries {
        site_uid: s.site_uid.clone(),
        sensor_id: s.sensor_id.clone(),
        batch_uids: s.batch_uids.clone(),
        points,
    };
    for theirs in &from.logger {
        let Some(mine) = by_key.get(&(theirs.site_uid.as_str(), theirs.sensor_id.as_str())) else {
            counts.new += theirs.points.len();
            plan.insert.logger.push(theirs.clone());
            continue;
        };
        let mut new = Vec::new();
        let mut replace = Vec::new();
        let mut a = mine.points.iter().peekable();
        for p in &theirs.points {
            while a.next_if(|q| q.time < p.time).is_some() {}
            let Some(q) = a.next_if(|q| q.time == p.time) else {
                new.push(p.clone());
                continue;
            };
            if q.depth_cm.to_bits() == p.depth_cm.to_bits()
                && q.sensor == p.sensor
                && q.value.to_bits() == p.value.to_bits()
            {
                counts.identical += 1;
                continue;
            }
            counts.conflicting += 1;
            let (resolved, because) = resolve(RowKind::Logger, prefs, None, NO_TIME, false);
            match resolved {
                Some((Side::From, _)) => {
                    counts.took_from += 1;
                    replace.push(p.clone());
                }
                Some((Side::Into, _)) => counts.kept_into += 1,
                None => {}
            }
            plan.conflicts.push(Conflict {
                kind: RowKind::Logger,
                what: format!(
                    "logger record {}/{} at {}",
                    labels.site(&theirs.site_uid),
                    theirs.sensor_id,
                    p.time
                ),
                fields: logger_fields(q, p),
                resolved,
                unresolved_because: because,
            });
        }
        counts.new += new.len();
        if !new.is_empty() {
            plan.insert.logger.push(part(theirs, new));
        }
        if !replace.is_empty() {
            plan.replace.logger.push(part(theirs, replace));
        }
    }
    plan.counts.insert(RowKind::Logger, counts);
}

/// The differing fields of two logger records (depth, sensor, value).
fn logger_fields(a: &LoggerPoint, b: &LoggerPoint) -> Vec<(String, String, String)> {
    let mut out = Vec::new();
    if a.depth_cm.to_bits() != b.depth_cm.to_bits() {
        out.push((
            "depth_cm".into(),
            a.depth_cm.to_string(),
            b.depth_cm.to_string(),
        ));
    }
    if a.sensor != b.sensor {
        out.push(("sensor".into(), a.sensor.clone(), b.sensor.clone()));
    }
    if a.value.to_bits() != b.value.to_bits() {
        out.push(("value".into(), a.value.to_string(), b.value.to_string()));
    }
    out
}

/// Rows that would share a code (sites, samples) or a place (a layer's depths at a site) in
/// the merged campaign while being different rows.
fn collisions(into: &CampaignRows, plan: &mut MergePlan, labels: &Labels<'_>) {
    fn check<'a, K: std::hash::Hash + Eq>(
        kind: RowKind,
        existing: impl Iterator<Item = (K, &'a str)>,
        incoming: impl Iterator<Item = (K, &'a str, String)>,
        out: &mut Vec<Collision>,
    ) {
        let mut seen: HashMap<K, &str> = existing.collect();
        for (key, uid, label) in incoming {
            match seen.get(&key) {
                Some(other) if *other != uid => out.push(Collision {
                    kind,
                    key: label,
                    into_uid: (*other).to_string(),
                    from_uid: uid.to_string(),
                }),
                _ => {
                    seen.insert(key, uid);
                }
            }
        }
    }
    // INTO's rows as they will stand (replaced ones leave their old code behind).
    let replaced = |uid: &str, list: &[&str]| list.contains(&uid);
    let site_repl: Vec<&str> = plan.replace.sites.iter().map(|s| s.uid.as_str()).collect();
    let sample_repl: Vec<&str> = plan
        .replace
        .samples
        .iter()
        .map(|s| s.uid.as_str())
        .collect();
    let layer_repl: Vec<&str> = plan.replace.layers.iter().map(|s| s.uid.as_str()).collect();
    let mut found = Vec::new();
    check(
        RowKind::Sites,
        into.sites
            .iter()
            .filter(|s| !replaced(&s.uid, &site_repl))
            .map(|s| (s.code.clone(), s.uid.as_str())),
        plan.insert
            .sites
            .iter()
            .chain(&plan.replace.sites)
            .map(|s| (s.code.clone(), s.uid.as_str(), format!("code {:?}", s.code))),
        &mut found,
    );
    check(
        RowKind::Samples,
        into.samples
            .iter()
            .filter(|s| !replaced(&s.uid, &sample_repl))
            .map(|s| (s.code.clone(), s.uid.as_str())),
        plan.insert
            .samples
            .iter()
            .chain(&plan.replace.samples)
            .map(|s| (s.code.clone(), s.uid.as_str(), format!("code {:?}", s.code))),
        &mut found,
    );
    let place = |l: &LayerRow| {
        (
            l.site_uid.clone(),
            l.top_cm.to_bits(),
            l.bottom_cm.to_bits(),
        )
    };
    check(
        RowKind::Layers,
        into.layers
            .iter()
            .filter(|l| !replaced(&l.uid, &layer_repl))
            .map(|l| (place(l), l.uid.as_str())),
        plan.insert
            .layers
            .iter()
            .chain(&plan.replace.layers)
            .map(|l| {
                (
                    place(l),
                    l.uid.as_str(),
                    format!(
                        "depth {}-{} cm of site {}",
                        l.top_cm,
                        l.bottom_cm,
                        labels.site(&l.site_uid)
                    ),
                )
            }),
        &mut found,
    );
    plan.collisions = found;
}

/// The plan that writes all of `from` into an empty campaign file, its campaign row (uid
/// included) too: what the archive's pull applies to a new file.
pub fn recreate(from: &CampaignRows) -> MergePlan {
    let empty = CampaignRows {
        campaign: from.campaign.clone(),
        batches: Vec::new(),
        sites: Vec::new(),
        layers: Vec::new(),
        samples: Vec::new(),
        readings: Vec::new(),
        conductivity: Vec::new(),
        logger: Vec::new(),
        flags: Vec::new(),
        flag_events: Vec::new(),
        fits: Vec::new(),
    };
    let mut plan = plan(&empty, from, &Preferences::default());
    plan.campaign = Some(from.campaign.clone());
    plan
}

impl MergePlan {
    /// The rows `into` holds once this plan is applied, computed in memory, so several files
    /// can be planned one after another before anything is written. Fits keep the readings
    /// key they came with (the file they land in decides whether they still match).
    pub fn merged(&self, into: &CampaignRows) -> CampaignRows {
        fn overlay<T: Clone>(
            base: &[T],
            replace: &[T],
            insert: &[T],
            uid: fn(&T) -> &str,
        ) -> Vec<T> {
            let by_uid: HashMap<&str, &T> = replace.iter().map(|r| (uid(r), r)).collect();
            base.iter()
                .map(|r| {
                    by_uid
                        .get(uid(r))
                        .map_or_else(|| r.clone(), |n| (*n).clone())
                })
                .chain(insert.iter().cloned())
                .collect()
        }
        let (ins, rep) = (&self.insert, &self.replace);
        let mut fits = overlay(&into.fits, &rep.fits, &ins.fits, |r| &r.uid);
        let current: HashMap<&str, &str> = self
            .current
            .iter()
            .map(|(s, f)| (s.as_str(), f.as_str()))
            .collect();
        let new_fits: HashSet<&str> = ins.fits.iter().map(|f| f.uid.as_str()).collect();
        for fit in &mut fits {
            if let Some(chosen) = current.get(fit.sample_uid.as_str()) {
                fit.is_current = fit.uid == *chosen;
            } else if new_fits.contains(fit.uid.as_str()) {
                fit.is_current = false;
            }
        }
        CampaignRows {
            campaign: self
                .campaign
                .clone()
                .unwrap_or_else(|| into.campaign.clone()),
            batches: overlay(&into.batches, &rep.batches, &ins.batches, |r| &r.uid),
            sites: overlay(&into.sites, &rep.sites, &ins.sites, |r| &r.uid),
            layers: overlay(&into.layers, &rep.layers, &ins.layers, |r| &r.uid),
            samples: overlay(&into.samples, &rep.samples, &ins.samples, |r| &r.uid),
            readings: overlay(&into.readings, &rep.readings, &ins.readings, |r| &r.uid),
            conductivity: overlay(
                &into.conductivity,
                &rep.conductivity,
                &ins.conductivity,
                |r| &r.uid,
            ),
            logger: merged_logger(&into.logger, &rep.logger, &ins.logger),
            flags: overlay(&into.flags, &rep.flags, &ins.flags, |r| &r.uid),
            flag_events: overlay(&into.flag_events, &[], &ins.flag_events, |r| &r.uid),
            fits,
        }
    }
}

/// Logger series with replaced and inserted records laid over them (each series sorted by
/// time, the batch index of every record moved into the merged series' list).
fn merged_logger(
    base: &[LoggerSeries],
    replace: &[LoggerSeries],
    insert: &[LoggerSeries],
) -> Vec<LoggerSeries> {
    let mut out: BTreeMap<(String, String), LoggerSeries> = base
        .iter()
        .map(|s| ((s.site_uid.clone(), s.sensor_id.clone()), s.clone()))
        .collect();
    for (incoming, replacing) in replace
        .iter()
        .map(|s| (s, true))
        .chain(insert.iter().map(|s| (s, false)))
    {
        let series = out
            .entry((incoming.site_uid.clone(), incoming.sensor_id.clone()))
            .or_insert_with(|| LoggerSeries {
                site_uid: incoming.site_uid.clone(),
                sensor_id: incoming.sensor_id.clone(),
                batch_uids: Vec::new(),
                points: Vec::new(),
            });
        let mut index_of = |batch: u32| -> u32 {
            let uid = incoming.batch_uids.get(batch as usize).cloned().flatten();
            if let Some(i) = series.batch_uids.iter().position(|b| *b == uid) {
                u32::try_from(i).unwrap_or(u32::MAX)
            } else {
                series.batch_uids.push(uid);
                u32::try_from(series.batch_uids.len() - 1).unwrap_or(u32::MAX)
            }
        };
        let points: Vec<LoggerPoint> = incoming
            .points
            .iter()
            .map(|p| LoggerPoint {
                batch: index_of(p.batch),
                ..p.clone()
            })
            .collect();
        if replacing {
            let by_time: HashMap<&str, &LoggerPoint> =
                points.iter().map(|p| (p.time.as_str(), p)).collect();
            for p in &mut series.points {
                if let Some(n) = by_time.get(p.time.as_str()) {
                    *p = (*n).clone();
                }
            }
        } else {
            series.points.extend(points);
            series.points.sort_by(|a, b| a.time.cmp(&b.time));
        }
    }
    out.into_values().collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::store::exchange::CampaignRow;

    fn empty(uid: &str) -> CampaignRows {
        CampaignRows {
            campaign: CampaignRow {
                uid: uid.into(),
                name: "Test".into(),
                description: None,
                fc_kpa: 33.0,
                pwp_kpa: 1500.0,
                created_at: "2026-01-01T00:00:00Z".into(),
                texture_prior_max_readings: None,
            },
            batches: Vec::new(),
            sites: Vec::new(),
            layers: Vec::new(),
            samples: Vec::new(),
            readings: Vec::new(),
            conductivity: Vec::new(),
            logger: Vec::new(),
            flags: Vec::new(),
            flag_events: Vec::new(),
            fits: Vec::new(),
        }
    }

    fn series(points: &[(&str, f64)]) -> LoggerSeries {
        LoggerSeries {
            site_uid: "s".repeat(36),
            sensor_id: "T1".into(),
            batch_uids: vec![None],
            points: points
                .iter()
                .map(|(t, v)| LoggerPoint {
                    time: (*t).into(),
                    depth_cm: 30.0,
                    sensor: "tensiometer".into(),
                    value: *v,
                    batch: 0,
                    source_line: None,
                })
                .collect(),
        }
    }

    #[test]
    fn preferences_parse_a_way_for_all_and_per_kind() {
        let mut p = Preferences::default();
        p.add("from").expect("all");
        p.add("flags=newer").expect("flags");
        assert_eq!(p.way(RowKind::Readings), Some(Way::From));
        assert_eq!(p.way(RowKind::Flags), Some(Way::Newer));
        assert!(
            p.add("flag=newer")
                .unwrap_err()
                .contains("unknown kind \"flag\"")
        );
        assert!(
            p.add("readings=latest")
                .unwrap_err()
                .contains("expected newer, into or from")
        );
        assert!(p.add("both").is_err());
    }

    #[test]
    fn logger_records_merge_join_by_time() {
        let mut into = empty("c");
        into.logger = vec![series(&[("t1", 1.0), ("t3", 3.0), ("t5", 5.0)])];
        let mut from = empty("c");
        from.logger = vec![series(&[
            ("t2", 2.0),
            ("t3", 3.5),
            ("t5", 5.0),
            ("t6", 6.0),
        ])];
        let plan = plan(&into, &from, &Preferences::default());
        let c = plan.counts[&RowKind::Logger];
        assert_eq!((c.new, c.identical, c.conflicting), (2, 1, 1));
        assert!(!plan.is_clean());
        assert_eq!(
            plan.conflicts[0].fields,
            vec![("value".into(), "3".into(), "3.5".into())]
        );
        let mut prefs = Preferences::default();
        prefs.add("logger=from").expect("prefer");
        let plan = super::plan(&into, &from, &prefs);
        assert!(plan.is_clean());
        let merged = plan.merged(&into);
        let values: Vec<(&str, f64)> = merged.logger[0]
            .points
            .iter()
            .map(|p| (p.time.as_str(), p.value))
            .collect();
        assert_eq!(
            values,
            vec![
                ("t1", 1.0),
                ("t2", 2.0),
                ("t3", 3.5),
                ("t5", 5.0),
                ("t6", 6.0)
            ]
        );
        // Planning the merged rows against FROM again finds nothing to write.
        assert!(super::plan(&merged, &from, &prefs).writes_nothing());
    }

    #[test]
    fn newer_cannot_decide_rows_without_a_time_and_another_campaign_is_refused() {
        let mut into = empty("a");
        let mut from = empty("b");
        into.sites.push(SiteRow {
            uid: "1".repeat(36),
            code: "S1".into(),
            name: Some("one".into()),
            latitude: None,
            longitude: None,
            elevation_m: None,
            notes: None,
            batch_uid: None,
        });
        from.sites.push(SiteRow {
            name: Some("uno".into()),
            ..into.sites[0].clone()
        });
        let mut prefs = Preferences::default();
        prefs.add("newer").expect("prefer");
        let p = plan(&into, &from, &prefs);
        assert!(p.refusal.is_some());
        assert_eq!(p.unresolved(), 1);
        assert_eq!(p.conflicts[0].unresolved_because.as_deref(), Some(NO_TIME));
        prefs.allow_other_campaign = true;
        prefs.add("sites=into").expect("prefer");
        let p = plan(&into, &from, &prefs);
        assert!(p.is_clean(), "{}", p.render());
        assert!(p.writes_nothing());
    }

    fn suggestion(reason: &str, score: f64) -> FlagRow {
        FlagRow {
            uid: "00000000-0000-4000-8000-00000000f1a9".into(),
            target: FlagTarget::Conductivity("00000000-0000-4000-8000-0000000000c1".into()),
            reason: reason.into(),
            score: Some(score),
            origin: "auto".into(),
            status: "suggested".into(),
            note: None,
            created_at: "2026-06-01T10:00:00Z".into(),
            decided_at: None,
            rule: Some("leave-one-out".into()),
            decided_by: None,
        }
    }

    fn decided(mut f: FlagRow, status: &str, at: &str) -> FlagRow {
        f.status = status.into();
        f.decided_at = Some(at.into());
        f.decided_by = Some("user".into());
        f
    }

    fn flag_plan(into: FlagRow, from: FlagRow, prefs: &Preferences) -> MergePlan {
        let mut a = empty("00000000-0000-4000-8000-0000000000aa");
        let mut b = a.clone();
        a.flags.push(into);
        b.flags.push(from);
        plan(&a, &b, prefs)
    }

    #[test]
    fn refreshed_suggestions_and_one_sided_decisions_are_not_conflicts() {
        let none = Preferences::default();
        // The checks ran again on one laptop: the open suggestion's text and score moved.
        let p = flag_plan(suggestion("4.1 sd", 4.1), suggestion("4.3 sd", 4.3), &none);
        assert!(p.conflicts.is_empty(), "{}", p.render());
        assert!(p.replace.flags.is_empty(), "INTO's text is kept");
        // Decided on the FROM laptop, still open on INTO: the decision comes over.
        let from = decided(
            suggestion("4.3 sd", 4.3),
            "accepted",
            "2026-06-02T08:00:00Z",
        );
        let p = flag_plan(suggestion("4.1 sd", 4.1), from.clone(), &none);
        assert!(p.conflicts.is_empty(), "{}", p.render());
        assert_eq!(p.replace.flags, vec![from.clone()]);
        // ... and the other way round INTO keeps its decision.
        let p = flag_plan(from.clone(), suggestion("4.1 sd", 4.1), &none);
        assert!(
            p.conflicts.is_empty() && p.replace.flags.is_empty(),
            "{}",
            p.render()
        );
        // Two different decisions stay a conflict until the user says how to settle it.
        let other = decided(
            suggestion("4.1 sd", 4.1),
            "dismissed",
            "2026-06-03T08:00:00Z",
        );
        let p = flag_plan(from.clone(), other.clone(), &none);
        assert_eq!(p.unresolved(), 1, "{}", p.render());
        let mut newer = Preferences::default();
        newer.add("flags=newer").expect("preference");
        let p = flag_plan(from, other.clone(), &newer);
        assert_eq!(p.unresolved(), 0);
        assert_eq!(p.replace.flags, vec![other]);
    }

    #[test]
    fn a_flag_decided_again_on_a_copy_that_saw_the_first_decision_is_the_later_state() {
        let event = |uid: &str, to: &str| FlagEventRow {
            uid: uid.into(),
            flag_uid: "00000000-0000-4000-8000-00000000f1a9".into(),
            from_status: None,
            to_status: to.into(),
            actor: "user".into(),
            note: None,
            at: "2026-06-02T08:00:00Z".into(),
        };
        let accepted = decided(
            suggestion("4.1 sd", 4.1),
            "accepted",
            "2026-06-02T08:00:00Z",
        );
        let cleared = decided(accepted.clone(), "cleared", "2026-06-05T08:00:00Z");
        let mut a = empty("00000000-0000-4000-8000-0000000000aa");
        let mut b = a.clone();
        a.flags.push(accepted);
        a.flag_events = vec![event("e1", "suggested"), event("e2", "accepted")];
        b.flags.push(cleared.clone());
        b.flag_events = vec![
            event("e1", "suggested"),
            event("e2", "accepted"),
            event("e3", "cleared"),
        ];
        let p = plan(&a, &b, &Preferences::default());
        assert_eq!(p.unresolved(), 0, "{}", p.render());
        assert_eq!(p.replace.flags, vec![cleared]);
        // The other way round INTO is the later state and keeps it.
        let p = plan(&b, &a, &Preferences::default());
        assert_eq!(p.unresolved(), 0, "{}", p.render());
        assert!(p.replace.flags.is_empty());
    }
}
