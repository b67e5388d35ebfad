//! Lab retention files: `site,top_cm,bottom_cm,sample,method,suction_<unit>|pf,
//! theta|theta_pct|water_g_per_g[,measured_on,bulk_density_g_cm3,weight,notes,branch]`.
//!
//! The suction and water-content columns say their unit in their name; values are turned
//! into canonical units (cm, m3/m3) here, except gravimetric water content without a bulk
//! density in the file, which is resolved against the campaign when the batch is applied.

use std::collections::{HashMap, HashSet};

use super::batch::{ImportBatch, Located, Origin, ReadingDraft, SampleDraft, Water};
use super::diagnostic::Diagnostics;
use super::fields::{Cells, HeaderCheck, SampleColumns, depths, finish_file, read_rows};
use super::layers::{BULK_DENSITY_EXPECTED, BULK_DENSITY_RANGE, name_site};
use super::table::{Header, RowSource};
use crate::model::domain::{Branch, Layer, LayerRef, Method, Sample, SampleKind, Uid};
use crate::model::retention::fredlund_xing::H_DRY_CM;
use crate::model::units::{SuctionUnit, WaterUnit};

/// The columns of a lab file, for messages.
pub const COLUMNS: &str = "site,top_cm,bottom_cm,sample,method,suction_<unit>|pf,\
     theta|theta_pct|water_g_per_g[,measured_on,bulk_density_g_cm3,weight,notes,branch]";

/// The driest suction accepted, cm: 10^6 kPa = 1.0197e7 cm (pF 7.01), where soil is oven dry,
/// the dry end of the Fredlund & Xing (1994) curve ([`H_DRY_CM`]). A value written as 10^6 kPa
/// in any unit is accepted even when its conversion rounds a few units in the last place above.
pub const MAX_SUCTION_CM: f64 = H_DRY_CM;

/// Every suction column name, for messages.
pub(crate) fn suction_names() -> String {
    let names: Vec<&str> = SuctionUnit::ALL.iter().map(|u| u.column_name()).collect();
    names.join(", ")
}

/// Every water-content column name, for messages.
const WATER_NAMES: &str = "theta, theta_pct, water_g_per_g";

/// Find the one column of a kind (suction or water content), reporting unknown units,
/// a second column and a missing one.
pub(crate) fn unit_column<U: Copy>(
    check: &mut HeaderCheck<'_>,
    header: &Header,
    diags: &mut Diagnostics,
    what: &str,
    missing_name: &str,
    expected: &str,
    recognise: impl Fn(&str) -> Option<Result<U, String>>,
) -> Option<(usize, U)> {
    let mut found: Option<(usize, U)> = None;
    let mut reported = false;
    for (i, name) in header.names().iter().enumerate() {
        let recognised = recognise(name);
        if recognised.is_some() {
            check.mark_used(i);
        }
        match recognised {
            None => {}
            Some(Err(suffix)) => {
                reported = true;
                check.fail(
                    diags,
                    name,
                    format!(
                        "found the unit {suffix:?} in column {name:?}, expected one of {expected}"
                    ),
                );
            }
            Some(Ok(unit)) => {
                if let Some((first, _)) = found {
                    reported = true;
                    check.fail(
                        diags,
                        name,
                        format!(
                            "found a second {what} column {name:?} besides {:?}, expected exactly one",
                            header.name(first)
                        ),
                    );
                } else {
                    found = Some((i, unit));
                }
            }
        }
    }
    if found.is_none() && !reported {
        check.fail(
            diags,
            missing_name,
            format!("found no {what} column in the header, expected one of {expected}"),
        );
    }
    found
}

/// Reads lab files into a batch, remembering sites, layers and samples across the files of
/// one command.
#[derive(Debug, Default)]
pub struct LabReader {
    sites: HashSet<String>,
    layers: HashSet<(String, u64, u64)>,
    /// The layer of the previous row: rows of one layer usually come together.
    last_layer: Option<LayerRef>,
    samples: HashMap<String, usize>,
}

impl LabReader {
    /// Read file number `file` of the batch from `table`.
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
        let suction = unit_column(
            &mut check,
            &header,
            diags,
            "suction",
            "suction_<unit>",
            &suction_names(),
            SuctionUnit::from_column,
        );
        let water = unit_column(
            &mut check,
            &header,
            diags,
            "water-content",
            "theta",
            WATER_NAMES,
            WaterUnit::from_column,
        );
        let c_measured = check.optional("measured_on");
        let c_bd = check.optional("bulk_density_g_cm3");
        let c_weight = check.optional("weight");
        let c_notes = check.optional("notes");
        let c_branch = check.optional("branch");
        let mut known = vec!["site", "top_cm", "bottom_cm", "sample", "method"];
        known.extend(SuctionUnit::ALL.iter().map(|u| u.column_name()));
        known.extend([
            "theta",
            "theta_pct",
            "water_g_per_g",
            "measured_on",
            "bulk_density_g_cm3",
            "weight",
            "notes",
            "branch",
        ]);
        check.unused(&known, diags);
        let (Some((c_suction, s_unit)), Some((c_water, w_unit)), true) =
            (suction, water, check.is_ok())
        else {
            return;
        };
        batch.files[file].suction = Some((header.name(c_suction).to_string(), s_unit));
        batch.files[file].water = Some((header.name(c_water).to_string(), w_unit));
        let rows = read_rows(&mut table, &header, diags, |cells| {
            let line = cells.line();
            let site = cells.code(c_site, "a site code");
            let depth = depths(cells, c_top, c_bottom);
            let code = cells.code(c_sample, "a sample code");
            let h_cm = read_suction(cells, c_suction, s_unit);
            let water = read_water(cells, c_water, w_unit);
            let measured_on = cells.optional_date(c_measured);
            let (lo, hi) = BULK_DENSITY_RANGE;
            let bd = cells.optional_in_range(c_bd, lo, hi, BULK_DENSITY_EXPECTED);
            let weight = cells.optional_positive(c_weight, "a positive fit weight");
            let branch = cells.optional_word::<Branch>(c_branch);
            let (Some(site), Some((top_cm, bottom_cm)), Some(code)) = (site, depth, code) else {
                return;
            };
            let at = LayerRef {
                site,
                top_cm,
                bottom_cm,
            };
            let origin = Origin { file, line };
            let known = self.samples.get(&code).copied();
            if let Some(idx) = known {
                let first = &batch.samples[idx];
                let place = batch.place(first.origin);
                let first_layer = &first.value.sample.layer;
                if !first_layer.same_as(&at) {
                    cells.fail(
                        c_sample,
                        format!(
                            "found sample {code:?} under layer {at}, but {place} puts it under \
                             {first_layer}; expected one layer per sample code"
                        ),
                    );
                }
                if let (Some(b), Some(b0), Some(col)) =
                    (bd, first.value.sample.bulk_density_g_cm3, c_bd)
                    && (b - b0).abs() > 1e-9
                {
                    let place = first.value.bulk_density_origin.map(|o| batch.place(o));
                    cells.fail(
                        col,
                        format!(
                            "found {b}, but {} gives sample {code:?} a bulk density of {b0} \
                             g/cm3; expected one bulk density per sample",
                            place.unwrap_or_default()
                        ),
                    );
                }
            }
            let (Some(h_cm), Some(water), true) = (h_cm, water, cells.is_ok()) else {
                return;
            };
            name_site(&mut self.sites, batch, &at.site, origin);
            if self.last_layer.as_ref().is_none_or(|l| !l.same_as(&at)) {
                if self.layers.insert(at.key()) {
                    batch.layers.push(Located {
                        origin,
                        value: Layer::bare(at.clone()),
                    });
                }
                self.last_layer = Some(at.clone());
            }
            if let Some(idx) = known {
                let draft = &mut batch.samples[idx].value;
                if draft.sample.bulk_density_g_cm3.is_none() && bd.is_some() {
                    draft.sample.bulk_density_g_cm3 = bd;
                    draft.bulk_density_origin = Some(origin);
                }
            } else {
                self.samples.insert(code.clone(), batch.samples.len());
                batch.samples.push(Located {
                    origin,
                    value: SampleDraft {
                        sample: Sample {
                            layer: at,
                            code: code.clone(),
                            kind: SampleKind::LabCore,
                            collected_on: None,
                            bulk_density_g_cm3: bd,
                            notes: None,
                            uid: Uid::random(),
                        },
                        bulk_density_origin: bd.map(|_| origin),
                    },
                });
            }
            batch.readings.push(Located {
                origin,
                value: ReadingDraft {
                    sample: code,
                    h_cm,
                    water,
                    method: cells.text(Some(c_method)).map(Method),
                    measured_on,
                    branch: branch.unwrap_or(Branch::Unknown),
                    weight,
                    notes: cells.text(c_notes),
                },
            });
        });
        finish_file(batch, file, rows, diags);
    }
}

/// The suction cell in cm: 0 or more (pF may be any number, `-inf` being 0 cm), at most
/// [`MAX_SUCTION_CM`].
pub(crate) fn read_suction(cells: &mut Cells<'_>, col: usize, unit: SuctionUnit) -> Option<f64> {
    let (v, h) = cells.suction(col, unit)?;
    if unit != SuctionUnit::Pf && v < 0.0 {
        let found = cells.found(col);
        cells.fail(
            col,
            format!(
                "found {found}, expected a suction of 0 or more (suction is positive when drier)"
            ),
        );
        return None;
    }
    if h > MAX_SUCTION_CM * (1.0 + 4.0 * f64::EPSILON) {
        let found = cells.found(col);
        cells.fail(
            col,
            format!(
                "found {found}, expected a suction of at most 10^6 kPa = 1.0197e7 cm \
                 (pF 7.01, oven dry)"
            ),
        );
        return None;
    }
    Some(h)
}

/// The water-content cell: a fraction 0-1, a percentage 0-100, or gravimetric g/g (0 or more).
fn read_water(cells: &mut Cells<'_>, col: usize, unit: WaterUnit) -> Option<Water> {
    let v = cells.number(col)?;
    match unit {
        WaterUnit::Fraction => cells
            .in_range(
                col,
                v,
                0.0,
                1.0,
                "a volumetric water content from 0 to 1 m3/m3",
            )
            .then_some(Water::Theta(v)),
        WaterUnit::Percent => cells
            .in_range(
                col,
                v,
                0.0,
                100.0,
                "a volumetric water content from 0 to 100 %",
            )
            .then(|| Water::Theta(v / 100.0)),
        WaterUnit::Gravimetric => cells
            .in_range(
                col,
                v,
                0.0,
                f64::MAX,
                "a gravimetric water content of 0 g/g or more",
            )
            .then_some(Water::Gravimetric(v)),
    }
}
