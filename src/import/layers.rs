//! Layers files: `site,top_cm,bottom_cm[,horizon,sand_pct,silt_pct,clay_pct,
//! organic_carbon_pct,bulk_density_g_cm3,ks_cm_per_day]`.

use std::collections::{HashMap, HashSet};

use super::batch::{ImportBatch, Located, Origin};
use super::diagnostic::Diagnostics;
use super::fields::{HeaderCheck, depths, finish_file, read_rows};
use super::table::RowSource;
use crate::model::domain::{Layer, LayerRef, Site, Uid};
use crate::model::number::significant;

/// The columns of a layers file, for messages.
pub const COLUMNS: &str = "site,top_cm,bottom_cm[,horizon,sand_pct,silt_pct,clay_pct,\
     organic_carbon_pct,bulk_density_g_cm3,ks_cm_per_day]";

/// Every column a layers file may have, for the suggestion beside an unknown one.
const KNOWN: [&str; 10] = [
    "site",
    "top_cm",
    "bottom_cm",
    "horizon",
    "sand_pct",
    "silt_pct",
    "clay_pct",
    "organic_carbon_pct",
    "bulk_density_g_cm3",
    "ks_cm_per_day",
];

/// How far sand + silt + clay may stray from 100 % (rounding in lab reports), percentage points.
pub const TEXTURE_SUM_TOLERANCE_PCT: f64 = 2.0;

/// Range of dry bulk density accepted, g/cm3: peat can be near 0.1, and no soil is denser
/// than its mineral particles (2.65, common practice).
pub const BULK_DENSITY_RANGE: (f64, f64) = (0.05, 2.65);

/// The message part for a bulk density out of range.
pub(crate) const BULK_DENSITY_EXPECTED: &str = "a dry bulk density from 0.05 to 2.65 g/cm3";

/// Add a site known only by its code, once per batch.
pub(crate) fn name_site(
    sites: &mut HashSet<String>,
    batch: &mut ImportBatch,
    code: &str,
    origin: Origin,
) {
    if !sites.contains(code) {
        sites.insert(code.to_string());
        batch.sites.push(Located {
            origin,
            value: Site::with_code(code),
        });
    }
}

/// Reads layers files into a batch, remembering layers across the files of one command.
#[derive(Debug, Default)]
pub struct LayersReader {
    sites: HashSet<String>,
    seen: HashMap<(String, u64, u64), Origin>,
}

impl LayersReader {
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
        let c_site = check.required("site", diags);
        let c_top = check.required("top_cm", diags);
        let c_bottom = check.required("bottom_cm", diags);
        let c_horizon = check.optional("horizon");
        let c_sand = check.optional("sand_pct");
        let c_silt = check.optional("silt_pct");
        let c_clay = check.optional("clay_pct");
        let c_oc = check.optional("organic_carbon_pct");
        let c_bd = check.optional("bulk_density_g_cm3");
        let c_ks = check.optional("ks_cm_per_day");
        check.unused(&KNOWN, diags);
        if !check.is_ok() {
            return;
        }
        let rows = read_rows(&mut table, &header, diags, |cells| {
            let line = cells.line();
            let site = cells.code(c_site, "a site code");
            let depth = depths(cells, c_top, c_bottom);
            let pct = "a mass percentage from 0 to 100";
            let sand = cells.optional_in_range(c_sand, 0.0, 100.0, pct);
            let silt = cells.optional_in_range(c_silt, 0.0, 100.0, pct);
            let clay = cells.optional_in_range(c_clay, 0.0, 100.0, pct);
            if let (Some(sa), Some(si), Some(cl), Some(col)) = (sand, silt, clay, c_clay) {
                let sum = sa + si + cl;
                if (sum - 100.0).abs() > TEXTURE_SUM_TOLERANCE_PCT {
                    let sum = significant(sum, 6).unwrap_or_default();
                    cells.fail(
                        col,
                        format!(
                            "found sand + silt + clay = {sa} + {si} + {cl} = {sum} %, expected \
                             100 +- {TEXTURE_SUM_TOLERANCE_PCT} %"
                        ),
                    );
                }
            }
            let oc = cells.optional_in_range(c_oc, 0.0, 100.0, pct);
            let (lo, hi) = BULK_DENSITY_RANGE;
            let bd = cells.optional_in_range(c_bd, lo, hi, BULK_DENSITY_EXPECTED);
            let ks = cells.optional_positive(c_ks, "a positive conductivity in cm/day");
            let origin = Origin { file, line };
            let (Some(site), Some((top_cm, bottom_cm))) = (site, depth) else {
                return;
            };
            let at = LayerRef {
                site,
                top_cm,
                bottom_cm,
            };
            if let Some(&first) = self.seen.get(&at.key()) {
                let place = batch.place(first);
                cells.fail(
                    c_top,
                    format!("found layer {at} again (first at {place}), expected each layer once"),
                );
            }
            if !cells.is_ok() {
                return;
            }
            self.seen.insert(at.key(), origin);
            name_site(&mut self.sites, batch, &at.site, origin);
            batch.layers.push(Located {
                origin,
                value: Layer {
                    at,
                    horizon: cells.text(c_horizon),
                    sand_pct: sand,
                    silt_pct: silt,
                    clay_pct: clay,
                    organic_carbon_pct: oc,
                    bulk_density_g_cm3: bd,
                    ks_cm_per_day: ks,
                    uid: Uid::random(),
                },
            });
        });
        finish_file(batch, file, rows, diags);
    }
}
