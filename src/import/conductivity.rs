//! Measured conductivity files: `site,top_cm,bottom_cm,sample,method,suction_<unit>|pf|theta|
//! theta_pct,conductivity_<unit>[,ks_<unit>,measured_on,notes]`.
//!
//! Each row is one measured K of a core, at a suction (K(h): evaporation, outflow, tension
//! infiltrometer) or at a water content (K(theta)); the unit is in the column name
//! (`conductivity_cm_per_day`, `_cm_per_h`, `_mm_per_h`, `_m_per_s`) and values are stored in
//! cm/day. An optional `ks_<unit>` column gives the core's measured saturated conductivity
//! (one value per sample). Sites, layers and samples are created on first sight, as in a lab
//! file. The checks against the campaign (a K already stored at that suction, another Ks) are
//! made by [`resolve`] inside the command's transaction; [`write`] stores the readings.

use std::collections::{HashMap, HashSet};

use chrono::NaiveDate;
use rusqlite::Connection;

use super::batch::{ImportBatch, Located, Origin, SampleDraft};
use super::diagnostic::Diagnostics;
use super::fields::{Cells, HeaderCheck, SampleColumns, depths, finish_file, read_rows};
use super::lab::{read_suction, suction_names, unit_column};
use super::layers::name_site;
use super::table::{Header, RowSource};
use crate::model::domain::{Layer, LayerRef, Sample, SampleKind, Uid};
use crate::model::number::significant;
use crate::model::units::{ConductivityUnit, SuctionUnit, WaterUnit};
use crate::store::conductivity::{self as store_k, ConductivityReading, Where};
use crate::store::{StoreError, samples};

/// The columns of a conductivity file, for messages.
pub const COLUMNS: &str = "site,top_cm,bottom_cm,sample,method,suction_<unit>|pf|theta|\
     theta_pct,conductivity_<unit>[,ks_<unit>,measured_on,notes]";

/// The largest conductivity accepted, cm/day (about 0.1 m/s: coarse gravel; the schema's
/// bound is 1e9).
pub const MAX_K_CM_PER_DAY: f64 = 1e7;

/// Two suctions closer than this (relative) are the same suction.
const SAME_SUCTION_RELATIVE: f64 = 1e-9;
/// Two water contents closer than this (m3/m3) are the same water content.
const SAME_THETA: f64 = 1e-12;

/// The conductivity column names, for messages.
fn conductivity_names(prefix: &str) -> String {
    let names: Vec<String> = ConductivityUnit::ALL
        .iter()
        .map(|u| u.column_name(prefix))
        .collect();
    names.join(", ")
}

/// How one file states where K was measured.
#[derive(Debug, Clone, Copy, PartialEq)]
enum AtColumn {
    Suction(SuctionUnit),
    Water(WaterUnit),
}

/// The columns of one file, for messages at resolution.
#[derive(Debug, Clone, PartialEq)]
pub struct FileColumns {
    /// The suction or water-content column's name.
    pub at: String,
    /// The conductivity column's name and unit.
    pub k: (String, ConductivityUnit),
    /// The Ks column's name and unit, when there is one.
    pub ks: Option<(String, ConductivityUnit)>,
    at_unit: AtColumn,
}

/// One conductivity row as read, canonical units.
#[derive(Debug, Clone, PartialEq)]
pub struct ConductivityDraft {
    /// Sample code.
    pub sample: String,
    /// Where K was measured.
    pub at: Where,
    /// K, cm/day.
    pub k_cm_per_day: f64,
    /// Method as written.
    pub method: Option<String>,
    /// Day measured.
    pub measured_on: Option<NaiveDate>,
    /// Free text.
    pub notes: Option<String>,
}

/// The conductivity part of an import batch.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct ConductivityBatch {
    /// Per file of the batch (by index), its columns once the header was read.
    pub files: Vec<Option<FileColumns>>,
    /// The K readings.
    pub readings: Vec<Located<ConductivityDraft>>,
    /// Measured Ks per sample (cm/day), first row that gives one.
    pub ks: Vec<Located<(String, f64)>>,
}

/// Reads conductivity files into a batch, remembering sites, layers and samples across the
/// files of one command.
#[derive(Debug, Default)]
pub struct ConductivityReader {
    sites: HashSet<String>,
    layers: HashSet<(String, u64, u64)>,
    samples: HashMap<String, usize>,
    ks: HashMap<String, usize>,
}

/// Find the one column that says where K was measured: a suction or a water content.
fn at_column(
    check: &mut HeaderCheck<'_>,
    header: &Header,
    diags: &mut Diagnostics,
) -> Option<(usize, AtColumn)> {
    let mut found: Vec<(usize, AtColumn)> = Vec::new();
    let mut reported = false;
    for (i, name) in header.names().iter().enumerate() {
        let unit = match (SuctionUnit::from_column(name), WaterUnit::from_column(name)) {
            (Some(Ok(u)), _) => AtColumn::Suction(u),
            (_, Some(Ok(WaterUnit::Gravimetric))) => {
                check.mark_used(i);
                reported = true;
                check.fail(
                    diags,
                    name,
                    format!(
                        "found the gravimetric column {name:?}, expected a volumetric water \
                         content (theta or theta_pct) for K(theta)"
                    ),
                );
                continue;
            }
            (_, Some(Ok(u))) => AtColumn::Water(u),
            (Some(Err(suffix)), _) | (_, Some(Err(suffix))) => {
                check.mark_used(i);
                reported = true;
                check.fail(
                    diags,
                    name,
                    format!(
                        "found the unit {suffix:?} in column {name:?}, expected one of {}, \
                         theta, theta_pct",
                        suction_names()
                    ),
                );
                continue;
            }
            (None, None) => continue,
        };
        check.mark_used(i);
        found.push((i, unit));
    }
    match found.as_slice() {
        [one] => Some(*one),
        [] => {
            if !reported {
                check.fail(
                    diags,
                    "suction_<unit>",
                    format!(
                        "found no suction or water-content column in the header, expected one \
                         of {}, theta, theta_pct (K(h) or K(theta))",
                        suction_names()
                    ),
                );
            }
            None
        }
        [(first, _), rest @ ..] => {
            for (i, _) in rest {
                check.fail(
                    diags,
                    header.name(*i),
                    format!(
                        "found a second column {:?} saying where K was measured besides {:?}, \
                         expected exactly one suction or water-content column",
                        header.name(*i),
                        header.name(*first)
                    ),
                );
            }
            None
        }
    }
}

/// The optional `ks_<unit>` column.
fn ks_column(
    check: &mut HeaderCheck<'_>,
    header: &Header,
    diags: &mut Diagnostics,
) -> Option<(usize, ConductivityUnit)> {
    let mut found = None;
    for (i, name) in header.names().iter().enumerate() {
        match ConductivityUnit::from_column("ks", name) {
            None => {}
            Some(Err(suffix)) => {
                check.mark_used(i);
                check.fail(
                    diags,
                    name,
                    format!(
                        "found the unit {suffix:?} in column {name:?}, expected one of {}",
                        conductivity_names("ks")
                    ),
                );
            }
            Some(Ok(unit)) => {
                check.mark_used(i);
                if let Some((first, _)) = found {
                    check.fail(
                        diags,
                        name,
                        format!(
                            "found a second Ks column {name:?} besides {:?}, expected at most one",
                            header.name(first)
                        ),
                    );
                } else {
                    found = Some((i, unit));
                }
            }
        }
    }
    found
}

/// A conductivity cell in `unit`: a finite number greater than 0, at most
/// [`MAX_K_CM_PER_DAY`]; returned in cm/day.
fn read_conductivity(cells: &mut Cells<'_>, col: usize, unit: ConductivityUnit) -> Option<f64> {
    let v = cells.number(col)?;
    let k = unit.to_cm_per_day(v);
    if v > 0.0 && k <= MAX_K_CM_PER_DAY {
        return Some(k);
    }
    let found = cells.found(col);
    let most = significant(unit.from_cm_per_day(MAX_K_CM_PER_DAY), 4).unwrap_or_default();
    cells.fail(
        col,
        format!(
            "found {found}, expected a conductivity greater than 0 and at most {most} {} \
             (1e7 cm/day)",
            unit.symbol()
        ),
    );
    None
}

impl ConductivityReader {
    /// Read file number `file` of the batch from `table`.
    #[allow(clippy::too_many_lines)] // one row's checks, in column order
    pub fn read(
        &mut self,
        file: usize,
        mut table: impl RowSource,
        batch: &mut ImportBatch,
        diags: &mut Diagnostics,
    ) {
        let name = table.file().to_string();
        let header = table.header().clone();
        let mut check = HeaderCheck::new(&name, &header, COLUMNS, diags);
        let SampleColumns {
            site: c_site,
            top: c_top,
            bottom: c_bottom,
            sample: c_sample,
            method: c_method,
        } = check.sample_columns(diags);
        let at = at_column(&mut check, &header, diags);
        let k = unit_column(
            &mut check,
            &header,
            diags,
            "conductivity",
            "conductivity_<unit>",
            &conductivity_names("conductivity"),
            |n| ConductivityUnit::from_column("conductivity", n),
        );
        let ks = ks_column(&mut check, &header, diags);
        let c_measured = check.optional("measured_on");
        let c_notes = check.optional("notes");
        let mut known: Vec<String> = ["site", "top_cm", "bottom_cm", "sample", "method"]
            .map(String::from)
            .to_vec();
        known.extend(SuctionUnit::ALL.iter().map(|u| u.column_name().to_string()));
        known.extend(["theta", "theta_pct", "measured_on", "notes"].map(String::from));
        for u in ConductivityUnit::ALL {
            known.push(u.column_name("conductivity"));
            known.push(u.column_name("ks"));
        }
        let known: Vec<&str> = known.iter().map(String::as_str).collect();
        check.unused(&known, diags);
        if batch.conductivity.files.len() <= file {
            batch.conductivity.files.resize(file + 1, None);
        }
        let (Some((c_at, at_unit)), Some((c_k, k_unit)), true) = (at, k, check.is_ok()) else {
            return;
        };
        batch.conductivity.files[file] = Some(FileColumns {
            at: header.name(c_at).to_string(),
            k: (header.name(c_k).to_string(), k_unit),
            ks: ks.map(|(i, u)| (header.name(i).to_string(), u)),
            at_unit,
        });
        let rows = read_rows(&mut table, &header, diags, |cells| {
            let line = cells.line();
            let site = cells.code(c_site, "a site code");
            let depth = depths(cells, c_top, c_bottom);
            let code = cells.code(c_sample, "a sample code");
            let where_ = match at_unit {
                AtColumn::Suction(u) => read_suction(cells, c_at, u).map(Where::Suction),
                AtColumn::Water(u) => read_theta(cells, c_at, u).map(Where::Water),
            };
            let k_cm_per_day = read_conductivity(cells, c_k, k_unit);
            let ks_value = match ks {
                Some((col, unit)) if !cells.cell(col).is_empty() => {
                    read_conductivity(cells, col, unit).map(|v| (col, v))
                }
                _ => None,
            };
            let measured_on = cells.optional_date(c_measured);
            let (Some(site), Some((top_cm, bottom_cm)), Some(code)) = (site, depth, code) else {
                return;
            };
            let at = LayerRef {
                site,
                top_cm,
                bottom_cm,
            };
            let origin = Origin { file, line };
            let known_sample = self.samples.get(&code).copied();
            if let Some(idx) = known_sample {
                let first = &batch.samples[idx];
                let first_layer = &first.value.sample.layer;
                if !first_layer.same_as(&at) {
                    let place = batch.place(first.origin);
                    cells.fail(
                        c_sample,
                        format!(
                            "found sample {code:?} under layer {at}, but {place} puts it under \
                             {first_layer}; expected one layer per sample code"
                        ),
                    );
                }
            }
            if let (Some((col, v)), Some(&idx)) = (ks_value, self.ks.get(&code)) {
                let first = &batch.conductivity.ks[idx];
                let v0 = first.value.1;
                if (v - v0).abs() > 1e-12 * v0 {
                    let place = batch.place(first.origin);
                    let found = cells.found(col);
                    cells.fail(
                        col,
                        format!(
                            "found {found}, but {place} gives sample {code:?} a Ks of {} \
                             cm/day; expected one Ks per sample",
                            significant(v0, 6).unwrap_or_default()
                        ),
                    );
                }
            }
            let (Some(where_), Some(k_cm_per_day), true) = (where_, k_cm_per_day, cells.is_ok())
            else {
                return;
            };
            name_site(&mut self.sites, batch, &at.site, origin);
            if self.layers.insert(at.key()) {
                batch.layers.push(Located {
                    origin,
                    value: Layer::bare(at.clone()),
                });
            }
            if known_sample.is_none() {
                self.samples.insert(code.clone(), batch.samples.len());
                batch.samples.push(Located {
                    origin,
                    value: SampleDraft {
                        sample: Sample {
                            layer: at,
                            code: code.clone(),
                            kind: SampleKind::LabCore,
                            collected_on: None,
                            bulk_density_g_cm3: None,
                            notes: None,
                            uid: Uid::random(),
                        },
                        bulk_density_origin: None,
                    },
                });
            }
            if let Some((_, v)) = ks_value
                && !self.ks.contains_key(&code)
            {
                self.ks.insert(code.clone(), batch.conductivity.ks.len());
                batch.conductivity.ks.push(Located {
                    origin,
                    value: (code.clone(), v),
                });
            }
            batch.conductivity.readings.push(Located {
                origin,
                value: ConductivityDraft {
                    sample: code,
                    at: where_,
                    k_cm_per_day,
                    method: cells.text(Some(c_method)),
                    measured_on,
                    notes: cells.text(c_notes),
                },
            });
        });
        finish_file(batch, file, rows, diags);
    }
}

/// A volumetric water content cell: a fraction 0-1 or a percentage 0-100, as m3/m3.
fn read_theta(cells: &mut Cells<'_>, col: usize, unit: WaterUnit) -> Option<f64> {
    let v = cells.number(col)?;
    match unit {
        WaterUnit::Percent => cells
            .in_range(
                col,
                v,
                0.0,
                100.0,
                "a volumetric water content from 0 to 100 %",
            )
            .then(|| v / 100.0),
        _ => cells
            .in_range(
                col,
                v,
                0.0,
                1.0,
                "a volumetric water content from 0 to 1 m3/m3",
            )
            .then_some(v),
    }
}

/// What a conductivity import adds, decided against the campaign.
#[derive(Debug, Default)]
pub(crate) struct Plan {
    /// Samples that get a Ks (code, cm/day, origin).
    ks: Vec<Located<(String, f64)>>,
}

impl Plan {
    /// How many samples get a measured Ks.
    pub(crate) fn ks_count(&self) -> u64 {
        self.ks.len() as u64
    }
}

/// One place a sample was measured, from the batch or already stored.
#[derive(Debug, Clone, Copy)]
enum Seen {
    Batch(Origin),
    Stored(usize),
}

/// Check the batch's conductivity readings and Ks values against each other and the
/// campaign: a sample measured twice at the same suction or water content, a Ks other than
/// the one stored. Problems go to `diags`.
pub(crate) fn resolve(
    conn: &Connection,
    batch: &ImportBatch,
    diags: &mut Diagnostics,
) -> Result<Plan, StoreError> {
    let k = &batch.conductivity;
    let known = samples::codes(conn)?;
    let mut stored_places: Vec<String> = Vec::new();
    let mut by_sample: HashMap<&str, Vec<(Where, Seen)>> = HashMap::new();
    let mut stored_ks: HashMap<&str, Option<f64>> = HashMap::new();
    for located in &batch.samples {
        let code = located.value.sample.code.as_str();
        if !known.contains(code) {
            continue;
        }
        let Some(sample) = samples::find(conn, code)? else {
            continue;
        };
        let list = by_sample.entry(code).or_default();
        for s in store_k::of_sample(conn, sample.id)? {
            stored_places.push(format!(
                "{}:{}",
                s.source_file.as_deref().unwrap_or("?"),
                s.reading.line
            ));
            list.push((s.reading.at, Seen::Stored(stored_places.len() - 1)));
        }
        stored_ks.insert(code, store_k::ks_of_sample(conn, sample.id)?.sample);
    }
    for r in &k.readings {
        by_sample
            .entry(r.value.sample.as_str())
            .or_default()
            .push((r.value.at, Seen::Batch(r.origin)));
    }
    let mut found: Vec<(Origin, String)> = Vec::new();
    for (code, list) in &mut by_sample {
        list.sort_by(|a, b| {
            let key = |w: &Where| match *w {
                Where::Suction(h) => (0, h),
                Where::Water(t) => (1, t),
            };
            let (ka, kb) = (key(&a.0), key(&b.0));
            ka.0.cmp(&kb.0)
                .then(ka.1.total_cmp(&kb.1))
                .then_with(|| order(a.1).cmp(&order(b.1)))
        });
        for pair in list.windows(2) {
            let ((w0, first), (w1, second)) = (pair[0], pair[1]);
            let same = match (w0, w1) {
                (Where::Suction(a), Where::Suction(b)) => {
                    (a - b).abs() <= SAME_SUCTION_RELATIVE * a.max(b)
                }
                (Where::Water(a), Where::Water(b)) => (a - b).abs() <= SAME_THETA,
                _ => false,
            };
            let Seen::Batch(at) = second else { continue };
            if !same {
                continue;
            }
            let what = match w1 {
                Where::Suction(h) => format!("{} cm", significant(h, 6).unwrap_or_default()),
                Where::Water(t) => format!("theta {}", significant(t, 6).unwrap_or_default()),
            };
            let message = match first {
                Seen::Batch(o) => format!(
                    "found sample {code:?} at {what} again (first at {}), expected one \
                     conductivity per suction or water content and sample",
                    batch.place(o)
                ),
                Seen::Stored(i) => format!(
                    "found sample {code:?} at {what}, which the campaign already holds a \
                     conductivity for (from {}), expected one conductivity per suction or \
                     water content and sample",
                    stored_places[i]
                ),
            };
            found.push((at, message));
        }
    }
    let mut plan = Plan::default();
    for located in &k.ks {
        let (code, v) = (&located.value.0, located.value.1);
        if let Some(Some(v0)) = stored_ks.get(code.as_str())
            && (v - v0).abs() > 1e-12 * v0
        {
            found.push((
                located.origin,
                format!(
                    "found a Ks of {} cm/day for sample {code:?}, but the campaign holds {} \
                     cm/day; expected one Ks per sample",
                    significant(v, 6).unwrap_or_default(),
                    significant(*v0, 6).unwrap_or_default()
                ),
            ));
            continue;
        }
        if stored_ks.get(code.as_str()).copied().flatten().is_none() {
            plan.ks.push(located.clone());
        }
    }
    found.sort_by_key(|(o, _)| *o);
    for (origin, message) in found {
        let column = k
            .files
            .get(origin.file)
            .and_then(Option::as_ref)
            .map_or("-", |f| {
                if message.contains("Ks") {
                    f.ks.as_ref().map_or("-", |(n, _)| n.as_str())
                } else {
                    f.at.as_str()
                }
            });
        diags.push(batch.file_name(origin), origin.line, column, message);
    }
    Ok(plan)
}

/// Stored readings sort before the batch's, and batch rows by file and line.
fn order(s: Seen) -> (u8, Origin, usize) {
    let zero = Origin { file: 0, line: 0 };
    match s {
        Seen::Stored(i) => (0, zero, i),
        Seen::Batch(o) => (1, o, 0),
    }
}

/// Store the batch's conductivity readings and Ks values (after its samples were written);
/// `batch_ids` has one import batch id per file.
pub(crate) fn write(
    conn: &Connection,
    batch: &ImportBatch,
    plan: &Plan,
    batch_ids: &[i64],
) -> Result<(), StoreError> {
    let mut cache: HashMap<String, i64> = HashMap::new();
    for located in &batch.conductivity.readings {
        let d = &located.value;
        let sample_id = sample_id(conn, &d.sample, &mut cache)?;
        store_k::insert(
            conn,
            sample_id,
            &ConductivityReading {
                sample: d.sample.clone(),
                at: d.at,
                k_cm_per_day: d.k_cm_per_day,
                method: d.method.clone(),
                measured_on: d.measured_on,
                notes: d.notes.clone(),
                batch: batch_ids.get(located.origin.file).copied(),
                line: located.origin.line,
                uid: Uid::random(),
            },
        )?;
    }
    for located in &plan.ks {
        let (code, v) = (&located.value.0, located.value.1);
        let sample_id = sample_id(conn, code, &mut cache)?;
        store_k::set_sample_ks(
            conn,
            sample_id,
            v,
            batch_ids.get(located.origin.file).copied(),
        )?;
    }
    Ok(())
}

/// The id of a sample the batch wrote or found, looked up once.
fn sample_id(
    conn: &Connection,
    code: &str,
    cache: &mut HashMap<String, i64>,
) -> Result<i64, StoreError> {
    if let Some(&id) = cache.get(code) {
        return Ok(id);
    }
    let id = samples::find(conn, code)?
        .map(|s| s.id)
        .ok_or_else(|| StoreError::Corrupt(format!("sample {code} not planned")))?;
    cache.insert(code.to_string(), id);
    Ok(id)
}
