//! `porewise list`: print what a campaign holds, as a table, CSV or JSON.

use std::path::PathBuf;

use anyhow::{Context, bail};
use clap::{Args, ValueEnum};

use crate::analysis::water::DEFAULT_ROOT_ZONE_CM;
use crate::analysis::{profiles, sample_fits};
use crate::error::Outcome;
use crate::model::units::{ConductivityUnit, SuctionUnit};
use crate::report::Listing;
use crate::report::campaign::{
    layers_listing, readings_listing_with_flags, samples_listing, sites_listing,
};
use crate::report::conductivity::{conductivity_listing, joint_fits_listing};
use crate::report::fits::{fits_listing, history_listing, pooled_note, profiles_listing};
use crate::report::review::{events_listing, flags_listing};
use crate::store::conductivity as store_k;
use crate::store::fits::{self as store_fits, Selection};
use crate::store::flags::{self, FlagFilter};
use crate::store::{Campaign, Filter, layers, readings, samples, sites};
use rusqlite::Connection;

/// What to list.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum, Default)]
pub enum What {
    /// Sites with counts of layers, samples and readings.
    #[default]
    Sites,
    /// Layers by site and depth.
    Layers,
    /// Samples with their layer and reading count.
    Samples,
    /// Readings; the first column is the reading id.
    Readings,
    /// The current fit of every sample (with --sample CODE --all: its whole fit history).
    Fits,
    /// Available water per layer and the profile total in mm down to --root-zone-cm.
    Profiles,
    /// Flags on readings and logger records, with their status and reason.
    Flags,
    /// Every status change of every flag, with its time and note (the audit trail).
    FlagEvents,
    /// Measured conductivity: K at a suction or a water content, with the sample's and its
    /// layer's measured Ks (unit: --k-units).
    Conductivity,
    /// Fits made with measured conductivity (history included): Ks and L with their errors,
    /// the statistics of each data set and jointly, the weighting.
    ConductivityFits,
}

/// Output format.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum, Default)]
pub enum Format {
    /// Aligned columns for people.
    #[default]
    Table,
    /// CSV with a header row (a readings listing imports as a lab file).
    Csv,
    /// A JSON array of objects.
    Json,
}

/// Arguments of `porewise list`.
#[derive(Debug, Args)]
#[command(
    after_help = "Examples:\n  porewise list spring.sqlite\n  porewise list spring.sqlite readings --site LV --units kpa\n  porewise list spring.sqlite samples --format csv > samples.csv\n  porewise list spring.sqlite fits --site LV\n  porewise list spring.sqlite fits --sample LV-Ap-a --all\n  porewise list spring.sqlite profiles --root-zone-cm 60\n  porewise list spring.sqlite profiles --fill-from-texture\n  porewise list spring.sqlite flags --sample LV-Ap-a\n  porewise list spring.sqlite flag-events\n  porewise list spring.sqlite conductivity --sample LV-Ap-a --k-units m/s"
)]
pub struct ListArgs {
    /// The campaign file.
    pub db: PathBuf,
    /// What to list.
    #[arg(value_enum, default_value_t = What::Sites)]
    pub what: What,
    /// Only this site (code).
    #[arg(long, value_name = "CODE")]
    pub site: Option<String>,
    /// Only this sample (code); for samples and readings.
    #[arg(long, value_name = "CODE")]
    pub sample: Option<String>,
    /// Output format.
    #[arg(long, value_enum, default_value_t = Format::Table)]
    pub format: Format,
    /// With `fits --sample CODE`: every fit attempt of the sample, not only the current one.
    #[arg(long)]
    pub all: bool,
    /// With `profiles`: the depth down to which available water is summed, cm.
    #[arg(long, value_name = "CM", default_value_t = DEFAULT_ROOT_ZONE_CM)]
    pub root_zone_cm: f64,
    /// With `profiles`: fill layers that have sand/silt/clay but no fitted core with their
    /// texture class's estimate (Carsel & Parrish 1988 class mean), marked ◌ in the basis
    /// column; the default lists measured values only.
    #[arg(long)]
    pub fill_from_texture: bool,
    /// Suction unit for readings: cm, hpa, kpa, mpa, bar or pf.
    #[arg(long, default_value = "cm", value_parser = parse_unit, value_name = "UNIT")]
    pub units: SuctionUnit,
    /// Conductivity unit for `conductivity`: cm/day, cm/h, mm/h or m/s.
    #[arg(long, default_value = "cm/day", value_parser = ConductivityUnit::parse, value_name = "UNIT")]
    pub k_units: ConductivityUnit,
}

fn parse_unit(s: &str) -> Result<SuctionUnit, String> {
    s.parse()
}

/// The `fits` listing: current fits, or one sample's history with `--all`.
fn fits(conn: &Connection, args: &ListArgs) -> anyhow::Result<Listing> {
    if args.all
        && let Some(code) = &args.sample
    {
        let sample = samples::find(conn, code)?.with_context(|| format!("no sample {code:?}"))?;
        return Ok(history_listing(
            code,
            &store_fits::history(conn, sample.id)?,
        ));
    }
    let selection = Selection {
        site: args.site.clone(),
        samples: args.sample.iter().cloned().collect(),
        ..Selection::default()
    };
    let settings = crate::store::campaign::settings(conn)?;
    Ok(fits_listing(&sample_fits(conn, &settings, &selection)?))
}

fn flag_filter(args: &ListArgs) -> FlagFilter {
    FlagFilter {
        site: args.site.clone(),
        sample: args.sample.clone(),
        ..FlagFilter::default()
    }
}

/// Name on stderr every reading with a stored value that cannot be read back (it is shown
/// empty; the rest of the listing or export goes on).
///
/// # Errors
/// An SQLite error.
pub(crate) fn warn_unreadable(conn: &Connection) -> anyhow::Result<()> {
    for row in readings::unreadable(conn)? {
        eprintln!("warning: {row}");
    }
    Ok(())
}

/// Run `porewise list`.
///
/// # Errors
/// The campaign cannot be opened, or a filter names a site or sample that is not there.
pub fn run(args: &ListArgs) -> anyhow::Result<Outcome> {
    let campaign = Campaign::open(&args.db)
        .with_context(|| format!("cannot open campaign {}", args.db.display()))?;
    let conn = campaign.connection();
    if let Some(code) = &args.site
        && sites::find(conn, code)?.is_none()
    {
        bail!(
            "no site {code:?} in {}; `porewise list {0}` shows the codes",
            args.db.display()
        );
    }
    if let Some(code) = &args.sample {
        if matches!(args.what, What::Sites | What::Layers | What::Profiles) {
            bail!(
                "--sample filters samples, readings, fits, flags and conductivity, not sites, layers or profiles"
            );
        }
        if samples::find(conn, code)?.is_none() {
            bail!(
                "no sample {code:?} in {}; `porewise list {0} samples` shows the codes",
                args.db.display()
            );
        }
    }
    if args.all && !(args.what == What::Fits && args.sample.is_some()) {
        bail!(
            "--all lists the fit history of one sample: porewise list DB fits --sample CODE --all"
        );
    }
    if !(args.root_zone_cm.is_finite() && args.root_zone_cm > 0.0) {
        bail!(
            "--root-zone-cm {}: expected a depth greater than 0 cm",
            args.root_zone_cm
        );
    }
    let filter = Filter {
        site: args.site.as_deref(),
        sample: args.sample.as_deref(),
    };
    let mut note = None;
    let listing: Listing = match args.what {
        What::Sites => sites_listing(&sites::list(conn, filter.site)?),
        What::Layers => layers_listing(&layers::list(conn, filter.site)?),
        What::Samples => samples_listing(&samples::list(conn, filter)?),
        What::Readings => {
            warn_unreadable(conn)?;
            readings_listing_with_flags(
                &readings::list(conn, filter)?,
                args.units,
                &flags::reading_marks(conn)?,
            )
        }
        What::Flags => flags_listing(&flags::list(conn, &flag_filter(args))?, args.units),
        What::FlagEvents => {
            let mut events = Vec::new();
            for row in flags::list(conn, &flag_filter(args))? {
                events.extend(flags::events(conn, row.stored.id)?);
            }
            events.sort_by_key(|e| e.id);
            events_listing(&events)
        }
        What::Fits => fits(conn, args)?,
        What::Conductivity => {
            let rows = store_k::list(conn, filter)?;
            let mut ks = std::collections::HashMap::new();
            for r in &rows {
                if let std::collections::hash_map::Entry::Vacant(e) = ks.entry(r.sample_id) {
                    e.insert(store_k::ks_of_sample(conn, r.sample_id)?);
                }
            }
            conductivity_listing(&rows, args.units, args.k_units, &ks)
        }
        What::ConductivityFits => joint_fits_listing(&store_k::joint_fits(conn, filter)?),
        What::Profiles => {
            let settings = campaign.settings()?;
            let mut list = profiles(conn, &settings, args.root_zone_cm, filter.site)?;
            if args.fill_from_texture {
                crate::analysis::texture::fill_from_texture(&mut list, &settings);
            }
            note = Some(pooled_note(&list));
            profiles_listing(&list)
        }
    };
    match args.format {
        Format::Table => print!(
            "{}{}",
            listing.to_table(),
            note.as_deref().unwrap_or_default()
        ),
        Format::Csv => print!("{}", listing.to_csv()?),
        Format::Json => print!("{}", listing.to_json()),
    }
    Ok(Outcome::Success)
}
