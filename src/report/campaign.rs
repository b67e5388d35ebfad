//! Listings of what a campaign holds (sites, layers, samples, readings) and its overview text.

use crate::model::texture::TextureClass;
use std::collections::HashMap;
use std::fmt;

use super::table::{Cell, Column, Listing};
use crate::model::number::{plural, significant};
use crate::model::text::shown;
use crate::model::units::SuctionUnit;
use crate::store::flags::Mark;
use crate::store::layers::LayerRow;
use crate::store::readings::ReadingRow;
use crate::store::samples::SampleRow;
use crate::store::sites::SiteRow;
use crate::store::{Counts, Overview};

fn columns(names: &[&str]) -> Vec<Column> {
    names
        .iter()
        .map(|n| {
            if *n == "uid" {
                Column::export_only(*n)
            } else {
                Column::new(*n)
            }
        })
        .collect()
}

/// Sites, first column the site code.
pub fn sites_listing(rows: &[SiteRow]) -> Listing {
    let mut l = Listing::new(columns(&[
        "site",
        "name",
        "latitude_deg",
        "longitude_deg",
        "elevation_m",
        "layers",
        "samples",
        "readings",
        "notes",
        "uid",
    ]));
    for r in rows {
        let s = &r.stored.site;
        l.push(vec![
            Cell::text(&s.code),
            s.name.clone().into(),
            s.latitude.into(),
            s.longitude.into(),
            s.elevation_m.into(),
            r.layers.into(),
            r.samples.into(),
            r.readings.into(),
            s.notes.clone().into(),
            Cell::text(s.uid.as_str()),
        ]);
    }
    l
}

/// Layers, first column the layer as `SITE:TOP-BOTTOM`.
pub fn layers_listing(rows: &[LayerRow]) -> Listing {
    let mut l = Listing::new(columns(&[
        "layer",
        "site",
        "top_cm",
        "bottom_cm",
        "horizon",
        "sand_pct",
        "silt_pct",
        "clay_pct",
        "texture",
        "organic_carbon_pct",
        "bulk_density_g_cm3",
        "ks_cm_per_day",
        "samples",
        "uid",
    ]));
    for r in rows {
        let layer = &r.stored.layer;
        l.push(vec![
            Cell::text(layer.at.to_string()),
            Cell::text(&layer.at.site),
            layer.at.top_cm.into(),
            layer.at.bottom_cm.into(),
            layer.horizon.clone().into(),
            layer.sand_pct.into(),
            layer.silt_pct.into(),
            layer.clay_pct.into(),
            TextureClass::of_layer(layer.sand_pct, layer.silt_pct, layer.clay_pct)
                .map(|t| t.name().to_string())
                .into(),
            layer.organic_carbon_pct.into(),
            layer.bulk_density_g_cm3.into(),
            layer.ks_cm_per_day.into(),
            r.samples.into(),
            Cell::text(layer.uid.as_str()),
        ]);
    }
    l
}

/// Samples, first column the sample code.
pub fn samples_listing(rows: &[SampleRow]) -> Listing {
    let mut l = Listing::new(columns(&[
        "sample",
        "layer",
        "site",
        "top_cm",
        "bottom_cm",
        "kind",
        "collected_on",
        "bulk_density_g_cm3",
        "readings",
        "notes",
        "uid",
    ]));
    for r in rows {
        let s = &r.stored.sample;
        l.push(vec![
            Cell::text(&s.code),
            Cell::text(s.layer.to_string()),
            Cell::text(&s.layer.site),
            s.layer.top_cm.into(),
            s.layer.bottom_cm.into(),
            Cell::text(s.kind.as_str()),
            s.collected_on.map(|d| d.to_string()).into(),
            s.bulk_density_g_cm3.into(),
            r.readings.into(),
            s.notes.clone().into(),
            Cell::text(s.uid.as_str()),
        ]);
    }
    l
}

/// Readings with suction in `unit`, first column the reading id.
///
/// The columns include those of a lab file (`site,top_cm,bottom_cm,sample,method,
/// suction_<unit>,theta_m3_m3,...`), so a CSV listing can be imported into another campaign;
/// its numbers are written in full (the suction as the shortest decimal in `unit` that the
/// import converts back to the stored value, `-inf` for 0 cm in pF), so that campaign holds
/// the very same values.
pub fn readings_listing(rows: &[ReadingRow], unit: SuctionUnit) -> Listing {
    readings_table(rows, unit, None)
}

/// As [`readings_listing`], with a `flag` column after `theta_m3_m3`: `excluded` (left out
/// of fits), `suggested` (waiting for review), `kept` (reviewed and kept) or empty.
pub fn readings_listing_with_flags<S: std::hash::BuildHasher>(
    rows: &[ReadingRow],
    unit: SuctionUnit,
    marks: &HashMap<i64, Mark, S>,
) -> Listing {
    let marks: HashMap<i64, Mark> = marks.iter().map(|(k, v)| (*k, *v)).collect();
    readings_table(rows, unit, Some(&marks))
}

fn readings_table(
    rows: &[ReadingRow],
    unit: SuctionUnit,
    marks: Option<&HashMap<i64, Mark>>,
) -> Listing {
    let mut names = vec![
        "reading",
        "sample",
        "site",
        "top_cm",
        "bottom_cm",
        unit.column_name(),
        "theta_m3_m3",
    ];
    if marks.is_some() {
        names.push("flag");
    }
    names.extend([
        "method",
        "branch",
        "measured_on",
        "weight",
        "notes",
        "source",
        "uid",
    ]);
    let mut l = Listing::new(columns(&names));
    for r in rows {
        let x = &r.stored.reading;
        let source = r
            .stored
            .source_file
            .as_ref()
            .map(|f| format!("{f}:{}", x.provenance.line));
        // Measurements in full (the suction as the shortest decimal in `unit` that converts
        // back to the stored value, `-inf` for 0 cm in pF): the CSV imports to the same values.
        let mut row = vec![
            r.stored.id.into(),
            Cell::text(&x.sample),
            Cell::text(&r.layer.site),
            Cell::exact(Some(r.layer.top_cm)),
            Cell::exact(Some(r.layer.bottom_cm)),
            Cell::Decimal(unit.cm_to_decimal(x.h_cm), unit.from_cm(x.h_cm)),
            Cell::exact(Some(x.theta)),
        ];
        if let Some(marks) = marks {
            row.push(
                marks
                    .get(&r.stored.id)
                    .map(|m| m.label().to_string())
                    .into(),
            );
        }
        row.extend([
            x.method.as_ref().map(ToString::to_string).into(),
            Cell::text(x.branch.as_str()),
            x.measured_on.map(|d| d.to_string()).into(),
            Cell::exact(x.weight),
            x.notes.clone().into(),
            source.into(),
            Cell::text(x.uid.as_str()),
        ]);
        l.push(row);
    }
    l
}

impl fmt::Display for Counts {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(
            f,
            "{}, {}, {}, {}",
            plural(self.sites, "site"),
            plural(self.layers, "layer"),
            plural(self.samples, "sample"),
            plural(self.readings, "reading")
        )
    }
}

fn num(v: f64) -> String {
    significant(v, 6).unwrap_or_default()
}

impl fmt::Display for Overview {
    /// The campaign as a tree: sites, their layers top down, each layer's samples with
    /// their reading counts.
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let s = &self.settings;
        writeln!(
            f,
            "Campaign {:?}: field capacity at {} kPa, wilting point at {} kPa",
            s.name,
            num(s.fc_kpa),
            num(s.pwp_kpa)
        )?;
        writeln!(f, "{}", self.counts)?;
        for site in &self.sites {
            writeln!(f)?;
            match &site.name {
                Some(name) => writeln!(f, "{}  {}", shown(&site.code), shown(name))?,
                None => writeln!(f, "{}", shown(&site.code))?,
            }
            if site.layers.is_empty() {
                writeln!(f, "  (no layers)")?;
            }
            for layer in &site.layers {
                let depth = format!("{}-{} cm", num(layer.top_cm), num(layer.bottom_cm));
                let horizon = shown(layer.horizon.as_deref().unwrap_or(""));
                let samples: Vec<String> = layer
                    .samples
                    .iter()
                    .map(|m| format!("{} ({})", shown(&m.code), plural(m.readings, "reading")))
                    .collect();
                let samples = if samples.is_empty() {
                    "no samples".to_string()
                } else {
                    samples.join(", ")
                };
                writeln!(f, "  {depth:<12} {horizon:<6} {samples}")?;
            }
        }
        Ok(())
    }
}
