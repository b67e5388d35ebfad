//! Applying a validated batch to the campaign: checks against what the file already holds,
//! then the writes, all inside the command's one transaction.

use std::collections::HashMap;

use rusqlite::Connection;

use super::ImportCounts;
use super::batch::{ImportBatch, Located, Origin, ReadingDraft, Water};
use super::diagnostic::Diagnostics;
use crate::model::domain::{LayerRef, Provenance, Reading, Uid};
use crate::model::number::significant;
use crate::model::units::{SuctionUnit, WATER_DENSITY_G_CM3};
use crate::store::{self, StoreError, batches, layers, readings, samples, sites};

/// Two suctions closer than this (relative) are the same suction written in different units.
const SAME_SUCTION_RELATIVE: f64 = 1e-9;

/// What to do with one site, layer or sample of the batch.
#[derive(Debug, Clone, Copy, PartialEq)]
enum Action {
    /// Insert it.
    New,
    /// It is stored under `id`; write the batch's details over it when `fill_in`.
    Existing { id: i64, fill_in: bool },
}

/// The decisions for a batch, in the batch's order, and its readings in canonical form.
#[derive(Debug)]
pub(crate) struct Plan {
    sites: Vec<Action>,
    layers: Vec<Action>,
    samples: Vec<Action>,
    readings: Vec<Located<Reading>>,
}

fn tally(actions: &[Action]) -> (u64, u64) {
    let added = actions.iter().filter(|a| **a == Action::New).count() as u64;
    let updated = actions
        .iter()
        .filter(|a| matches!(a, Action::Existing { fill_in: true, .. }))
        .count() as u64;
    (added, updated)
}

impl Plan {
    /// Rows added and updated.
    pub(crate) fn counts(&self) -> ImportCounts {
        let (sites_added, sites_updated) = tally(&self.sites);
        let (layers_added, layers_updated) = tally(&self.layers);
        let (samples_added, samples_updated) = tally(&self.samples);
        ImportCounts {
            sites_added,
            sites_updated,
            layers_added,
            layers_updated,
            samples_added,
            samples_updated,
            readings_added: self.readings.len() as u64,
            ..ImportCounts::default()
        }
    }
}

/// What resolution knows about a sample: its bulk density and its layer's.
#[derive(Debug, Clone, Copy, Default)]
struct Densities {
    sample: Option<f64>,
    layer: Option<f64>,
}

/// Check the batch against the campaign and decide every insert and update.
///
/// Problems go to `diags` (nothing is written when there are any); the error is for SQLite.
/// New layers that overlap another layer of their site are problems unless `allow_overlap`.
pub(crate) fn resolve(
    conn: &Connection,
    batch: &ImportBatch,
    drafts: Vec<Located<ReadingDraft>>,
    allow_overlap: bool,
    diags: &mut Diagnostics,
) -> Result<Plan, StoreError> {
    let mut plan = Plan {
        sites: Vec::with_capacity(batch.sites.len()),
        layers: Vec::with_capacity(batch.layers.len()),
        samples: Vec::with_capacity(batch.samples.len()),
        readings: Vec::with_capacity(drafts.len()),
    };
    for site in &batch.sites {
        plan.sites.push(match sites::find(conn, &site.value.code)? {
            Some(old) => Action::Existing {
                id: old.id,
                fill_in: sites::would_change(&old.site, &site.value),
            },
            None => Action::New,
        });
    }
    let mut layer_density = HashMap::new();
    for layer in &batch.layers {
        let found = layers::find(conn, &layer.value.at)?;
        let density = found
            .as_ref()
            .and_then(|old| old.layer.bulk_density_g_cm3)
            .or(layer.value.bulk_density_g_cm3);
        layer_density.insert(layer.value.at.key(), density);
        plan.layers.push(match found {
            Some(old) => Action::Existing {
                id: old.id,
                fill_in: layers::would_change(&old.layer, &layer.value),
            },
            None => Action::New,
        });
    }
    if !allow_overlap {
        check_overlaps(conn, batch, &plan.layers, diags)?;
    }
    // Per sample: densities for gravimetric water, and stored readings for the duplicate check.
    let mut densities: HashMap<&str, Densities> = HashMap::new();
    let mut stored: HashMap<&str, Vec<readings::StoredReading>> = HashMap::new();
    let known = samples::codes(conn)?;
    for located in &batch.samples {
        let draft = &located.value;
        let sample = &draft.sample;
        let here = sample.bulk_density_g_cm3;
        let old = if known.contains(&sample.code) {
            samples::find(conn, &sample.code)?
        } else {
            None
        };
        let Some(old) = old else {
            plan.samples.push(Action::New);
            densities.insert(
                &sample.code,
                Densities {
                    sample: here,
                    layer: layer_density.get(&sample.layer.key()).copied().flatten(),
                },
            );
            continue;
        };
        if !old.sample.layer.same_as(&sample.layer) {
            diags.push(
                batch.file_name(located.origin),
                located.origin.line,
                "sample",
                format!(
                    "found sample {:?} under layer {}, but the campaign already holds it under \
                     {}; expected one layer per sample code",
                    sample.code, sample.layer, old.sample.layer
                ),
            );
        }
        let mut fill_in = false;
        match (
            old.sample.bulk_density_g_cm3,
            here,
            draft.bulk_density_origin,
        ) {
            (Some(b0), Some(b), Some(origin)) if (b - b0).abs() > 1e-9 => diags.push(
                batch.file_name(origin),
                origin.line,
                "bulk_density_g_cm3",
                format!(
                    "found {b}, but the campaign holds a bulk density of {b0} g/cm3 for sample \
                     {:?}; expected one bulk density per sample",
                    sample.code
                ),
            ),
            (None, Some(_), _) => fill_in = true,
            _ => {}
        }
        plan.samples.push(Action::Existing {
            id: old.id,
            fill_in,
        });
        densities.insert(
            &sample.code,
            Densities {
                sample: old.sample.bulk_density_g_cm3.or(here),
                layer: old.layer_bulk_density_g_cm3,
            },
        );
        stored.insert(&sample.code, readings::of_sample(conn, old.id)?);
    }
    for located in drafts {
        let density = densities
            .get(located.value.sample.as_str())
            .copied()
            .unwrap_or_default();
        if let Some(theta) = water_content(batch, &located, density, diags) {
            plan.readings.push(Located {
                origin: located.origin,
                value: to_reading(located.value, theta, located.origin.line),
            });
        }
    }
    check_duplicate_suctions(batch, &plan.readings, &stored, diags);
    Ok(plan)
}

/// Whether two layers of one site share some depth (touching at a boundary is not sharing).
fn overlaps(a: &LayerRef, b: &LayerRef) -> bool {
    a.top_cm < b.bottom_cm && b.top_cm < a.bottom_cm && !a.same_as(b)
}

/// Report every new layer whose depth range overlaps another layer of its site: one the
/// campaign holds, or one earlier in the batch. Both ranges are named.
fn check_overlaps(
    conn: &Connection,
    batch: &ImportBatch,
    actions: &[Action],
    diags: &mut Diagnostics,
) -> Result<(), StoreError> {
    const EXPECTED: &str = "expected layers of one site that do not overlap (--allow-overlap \
                            accepts layers nested or overlapping on purpose)";
    let mut stored: HashMap<&str, Vec<LayerRef>> = HashMap::new();
    let mut earlier: HashMap<&str, Vec<(&LayerRef, Origin)>> = HashMap::new();
    for (located, action) in batch.layers.iter().zip(actions) {
        let at = &located.value.at;
        if *action != Action::New {
            continue;
        }
        if !stored.contains_key(at.site.as_str()) {
            let list = layers::list(conn, Some(&at.site))?
                .into_iter()
                .map(|row| row.stored.layer.at)
                .collect();
            stored.insert(&at.site, list);
        }
        let message = if let Some(l) = stored[at.site.as_str()].iter().find(|l| overlaps(l, at)) {
            Some(format!(
                "found layer {at}, which overlaps layer {l} that the campaign holds; {EXPECTED}"
            ))
        } else {
            earlier
                .get(at.site.as_str())
                .and_then(|list| list.iter().find(|(l, _)| overlaps(l, at)))
                .map(|(l, origin)| {
                    format!(
                        "found layer {at}, which overlaps layer {l} (at {}); {EXPECTED}",
                        batch.place(*origin)
                    )
                })
        };
        if let Some(message) = message {
            diags.push(
                batch.file_name(located.origin),
                located.origin.line,
                "top_cm",
                message,
            );
        }
        earlier
            .entry(&at.site)
            .or_default()
            .push((at, located.origin));
    }
    Ok(())
}

/// Volumetric water content of a draft, reporting gravimetric values that cannot be converted.
fn water_content(
    batch: &ImportBatch,
    located: &Located<ReadingDraft>,
    density: Densities,
    diags: &mut Diagnostics,
) -> Option<f64> {
    let w = match located.value.water {
        Water::Theta(theta) => return Some(theta),
        Water::Gravimetric(w) => w,
    };
    let column = batch.files[located.origin.file]
        .water
        .as_ref()
        .map_or("water_g_per_g", |(name, _)| name.as_str());
    let file = batch.file_name(located.origin);
    let line = located.origin.line;
    let sample = &located.value.sample;
    let Some(rho_b) = density.sample.or(density.layer) else {
        diags.push(
            file,
            line,
            column,
            format!(
                "found {w} g/g for sample {sample:?} but no bulk density (none in the row, for \
                 the sample or for its layer), expected a bulk_density_g_cm3 to convert it"
            ),
        );
        return None;
    };
    let theta = w * rho_b / WATER_DENSITY_G_CM3;
    if theta > 1.0 {
        diags.push(
            file,
            line,
            column,
            format!(
                "found {w} g/g, which with bulk density {rho_b} g/cm3 is theta {}, expected at \
                 most 1 m3/m3",
                significant(theta, 4).unwrap_or_default()
            ),
        );
        return None;
    }
    Some(theta)
}

/// The domain reading of a draft, with its water content resolved.
fn to_reading(draft: ReadingDraft, theta: f64, line: u64) -> Reading {
    Reading {
        sample: draft.sample,
        h_cm: draft.h_cm,
        theta,
        method: draft.method,
        measured_on: draft.measured_on,
        branch: draft.branch,
        weight: draft.weight,
        notes: draft.notes,
        provenance: Provenance { batch: None, line },
        uid: Uid::random(),
    }
}

/// One suction of a sample, from the batch or already stored.
#[derive(Debug, Clone, Copy)]
enum Seen {
    Batch(Origin),
    Stored { file: Option<usize>, line: u64 },
}

/// Report a sample measured twice at the same suction (same branch), within the batch or
/// against the campaign.
fn check_duplicate_suctions(
    batch: &ImportBatch,
    planned: &[Located<Reading>],
    stored: &HashMap<&str, Vec<readings::StoredReading>>,
    diags: &mut Diagnostics,
) {
    let mut stored_names: Vec<&str> = Vec::new();
    let mut by_sample: HashMap<&str, Vec<(f64, crate::model::domain::Branch, Seen)>> =
        HashMap::new();
    for (code, list) in stored {
        let entry = by_sample.entry(code).or_default();
        for s in list {
            let file = s.source_file.as_deref().map(|name| {
                stored_names.push(name);
                stored_names.len() - 1
            });
            entry.push((
                s.reading.h_cm,
                s.reading.branch,
                Seen::Stored {
                    file,
                    line: s.reading.provenance.line,
                },
            ));
        }
    }
    for r in planned {
        by_sample.entry(r.value.sample.as_str()).or_default().push((
            r.value.h_cm,
            r.value.branch,
            Seen::Batch(r.origin),
        ));
    }
    let mut found: Vec<(Origin, String)> = Vec::new();
    for (code, list) in &mut by_sample {
        if list.len() < 2 {
            continue;
        }
        list.sort_by(|a, b| {
            (a.1 as u8)
                .cmp(&(b.1 as u8))
                .then(a.0.total_cmp(&b.0))
                .then_with(|| seen_order(a.2).cmp(&seen_order(b.2)))
        });
        for pair in list.windows(2) {
            let ((h0, b0, first), (h1, b1, second)) = (pair[0], pair[1]);
            if b0 != b1 || (h1 - h0).abs() > SAME_SUCTION_RELATIVE * h1.max(h0) {
                continue;
            }
            let Seen::Batch(at) = second else { continue };
            let unit = batch.files[at.file].suction.as_ref().map(|(_, u)| *u);
            let h = suction_text(h1, unit.unwrap_or_default());
            let message = match first {
                Seen::Batch(o) => format!(
                    "found sample {code:?} at {h} again (first at {}), expected each suction \
                     once per sample",
                    batch.place(o)
                ),
                Seen::Stored { file, line } => format!(
                    "found sample {code:?} at {h}, which the campaign already holds (from \
                     {}:{line}), expected each suction once per sample",
                    file.map_or("?", |i| stored_names[i])
                ),
            };
            found.push((at, message));
        }
    }
    found.sort_by_key(|(o, _)| *o);
    for (origin, message) in found {
        let column = batch.files[origin.file]
            .suction
            .as_ref()
            .map_or("-", |(name, _)| name.as_str());
        diags.push(batch.file_name(origin), origin.line, column, message);
    }
}

/// A suction as the file wrote it, with its value in cm: `10 kPa (101.972 cm)`, `pF 2 (100 cm)`.
fn suction_text(h_cm: f64, unit: SuctionUnit) -> String {
    let cm = significant(h_cm, 6).unwrap_or_default();
    let written = significant(unit.from_cm(h_cm), 6).unwrap_or_default();
    match unit {
        SuctionUnit::Cm => format!("{cm} cm"),
        SuctionUnit::Pf => format!("pF {written} ({cm} cm)"),
        _ => format!("{written} {} ({cm} cm)", unit.symbol()),
    }
}

/// Stored readings sort before the batch's, and batch rows by file and line.
fn seen_order(s: Seen) -> (u8, Origin) {
    match s {
        Seen::Stored { .. } => (0, Origin { file: 0, line: 0 }),
        Seen::Batch(o) => (1, o),
    }
}

/// Write a resolved batch: one import_batch row per file, then sites, layers, samples and
/// readings. Returns the batch ids, one per file.
pub(crate) fn write(
    conn: &Connection,
    batch: &ImportBatch,
    plan: Plan,
    forced: bool,
) -> Result<Vec<i64>, StoreError> {
    let mut batch_ids = Vec::with_capacity(batch.files.len());
    for f in &batch.files {
        batch_ids.push(batches::insert(
            conn,
            &batches::NewBatch {
                file_name: &f.recorded_name(),
                sha256: &f.sha256,
                kind: batch.kind.as_str(),
                rows: f.rows,
                forced,
            },
        )?);
    }
    let mut site_ids: HashMap<&str, i64> = HashMap::new();
    for (located, action) in batch.sites.iter().zip(&plan.sites) {
        let site = &located.value;
        let id = match *action {
            Action::New => sites::insert(conn, site, Some(batch_ids[located.origin.file]))?,
            Action::Existing { id, fill_in } => {
                if fill_in {
                    sites::fill_in(conn, id, site)?;
                }
                id
            }
        };
        site_ids.insert(&site.code, id);
    }
    let mut layer_ids = HashMap::new();
    for (located, action) in batch.layers.iter().zip(&plan.layers) {
        let layer = &located.value;
        let id = match *action {
            Action::New => {
                let site_id = match site_ids.get(layer.at.site.as_str()) {
                    Some(&id) => id,
                    None => site_id_of(conn, &layer.at.site)?,
                };
                layers::insert(conn, site_id, layer, Some(batch_ids[located.origin.file]))?
            }
            Action::Existing { id, fill_in } => {
                if fill_in {
                    layers::fill_in(conn, id, layer)?;
                }
                id
            }
        };
        layer_ids.insert(layer.at.key(), id);
    }
    let mut sample_ids: HashMap<&str, i64> = HashMap::new();
    for (located, action) in batch.samples.iter().zip(&plan.samples) {
        let sample = &located.value.sample;
        let id = match *action {
            Action::New => {
                let layer_id = layer_ids.get(&sample.layer.key()).copied().ok_or_else(|| {
                    StoreError::Corrupt(format!(
                        "layer {} of sample {} not planned",
                        sample.layer, sample.code
                    ))
                })?;
                samples::insert(conn, layer_id, sample, Some(batch_ids[located.origin.file]))?
            }
            Action::Existing { id, fill_in } => {
                if let (true, Some(bd)) = (fill_in, sample.bulk_density_g_cm3) {
                    samples::set_bulk_density(conn, id, bd)?;
                }
                id
            }
        };
        sample_ids.insert(&sample.code, id);
    }
    let mut inserter = readings::ReadingInserter::new(conn)?;
    for mut located in plan.readings {
        let sample_id = sample_ids
            .get(located.value.sample.as_str())
            .copied()
            .ok_or_else(|| {
                StoreError::Corrupt(format!("sample {} not planned", located.value.sample))
            })?;
        located.value.provenance.batch = Some(batch_ids[located.origin.file]);
        inserter.insert(sample_id, &located.value)?;
    }
    Ok(batch_ids)
}

/// The id of a stored site (a layer's site that the batch did not name).
fn site_id_of(conn: &Connection, code: &str) -> Result<i64, StoreError> {
    sites::find(conn, code)?
        .map(|s| s.id)
        .ok_or_else(|| StoreError::Corrupt(format!("site {code} not planned")))
}

/// Every earlier import of the batch's files (by SHA-256).
pub(crate) fn earlier_imports(
    conn: &Connection,
    batch: &ImportBatch,
) -> Result<Vec<(String, store::batches::ImportBatchRecord)>, StoreError> {
    let mut out = Vec::new();
    for f in &batch.files {
        if let Some(rec) = batches::find_by_sha256(conn, &f.sha256)? {
            out.push((f.name.clone(), rec));
        }
    }
    Ok(out)
}
