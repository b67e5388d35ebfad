//! Sites files: `site,name,latitude,longitude[,elevation_m,notes]`, WGS 84 decimal degrees.

use std::collections::HashMap;

use super::batch::{ImportBatch, Located, Origin};
use super::diagnostic::Diagnostics;
use super::fields::{HeaderCheck, finish_file, read_rows};
use super::table::RowSource;
use crate::model::domain::{Site, Uid};

/// The columns of a sites file, for messages.
pub const COLUMNS: &str = "site,name,latitude,longitude[,elevation_m,notes]";

/// Every column a sites file may have, for the suggestion beside an unknown one.
const KNOWN: [&str; 6] = [
    "site",
    "name",
    "latitude",
    "longitude",
    "elevation_m",
    "notes",
];

/// Lowest and highest elevation accepted, m (the lowest and highest land on Earth, rounded out).
pub const ELEVATION_RANGE_M: (f64, f64) = (-500.0, 9000.0);

/// Reads sites files into a batch, remembering codes across the files of one command.
#[derive(Debug, Default)]
pub struct SitesReader {
    seen: HashMap<String, Origin>,
}

impl SitesReader {
    /// Read file number `file` of the batch from `table`, adding its sites and reporting every
    /// bad row.
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
        let c_name = check.required("name", diags);
        let c_lat = check.required("latitude", diags);
        let c_lon = check.required("longitude", diags);
        let c_elev = check.optional("elevation_m");
        let c_notes = check.optional("notes");
        check.unused(&KNOWN, diags);
        if !check.is_ok() {
            return;
        }
        let rows = read_rows(&mut table, &header, diags, |cells| {
            let line = cells.line();
            let code = cells.code(c_site, "a site code");
            let lat = cells.number(c_lat);
            let lat = lat.filter(|&v| {
                cells.in_range(
                    c_lat,
                    v,
                    -90.0,
                    90.0,
                    "a latitude from -90 to 90 degrees (WGS 84)",
                )
            });
            let lon = cells.number(c_lon);
            let lon = lon.filter(|&v| {
                cells.in_range(
                    c_lon,
                    v,
                    -180.0,
                    180.0,
                    "a longitude from -180 to 180 degrees (WGS 84)",
                )
            });
            let (lo, hi) = ELEVATION_RANGE_M;
            let elevation = cells.optional_in_range(
                c_elev,
                lo,
                hi,
                "an elevation in m from -500 to 9000 above sea level",
            );
            let origin = Origin { file, line };
            if let Some(code) = &code
                && let Some(&first) = self.seen.get(code)
            {
                let place = batch.place(first);
                cells.fail(
                    c_site,
                    format!(
                        "found site {code:?} again (first at {place}), expected each site once"
                    ),
                );
            }
            if !cells.is_ok() {
                return;
            }
            let Some(code) = code else { return };
            self.seen.insert(code.clone(), origin);
            batch.sites.push(Located {
                origin,
                value: Site {
                    code,
                    name: cells.text(Some(c_name)),
                    latitude: lat,
                    longitude: lon,
                    elevation_m: elevation,
                    notes: cells.text(c_notes),
                    uid: Uid::random(),
                },
            });
        });
        finish_file(batch, file, rows, diags);
    }
}
