//! `porewise import sites|layers|lab|conductivity|logger`: read CSV files (and, for sites,
//! layers and lab readings, .xlsx / .ods workbooks) into a campaign, all or nothing.

use clap::{Args, Subcommand};

pub use super::shared::ImportArgs;
pub(crate) use super::shared::{open, print_warnings};
use crate::error::Outcome;
use crate::import::{self, ImportError, ImportKind, ImportOptions};

/// The arguments of the imports that can create layers (`layers`, `lab`).
#[derive(Debug, Args)]
pub struct LayerImportArgs {
    /// The campaign, the files and how to import them.
    #[command(flatten)]
    pub import: ImportArgs,
    /// Accept layers of one site whose depth ranges overlap, for layers sampled nested
    /// (5-10 cm inside 0-20 cm) or across another on purpose; without it such a layer is
    /// refused with both ranges named.
    #[arg(long)]
    pub allow_overlap: bool,
}

/// What kind of file to import.
#[derive(Debug, Subcommand)]
pub enum ImportCommand {
    /// Sites: site,name,latitude,longitude[,elevation_m,notes] (WGS 84 decimal degrees).
    #[command(after_help = "Example:\n  porewise import sites spring.sqlite sites.csv")]
    Sites(ImportArgs),
    /// Layers: site,top_cm,bottom_cm[,horizon,sand_pct,silt_pct,clay_pct,organic_carbon_pct,bulk_density_g_cm3,ks_cm_per_day].
    #[command(
        after_help = "Examples:\n  porewise import layers spring.sqlite layers.csv --dry-run\n  \
         porewise import layers spring.sqlite subsamples.csv --allow-overlap"
    )]
    Layers(LayerImportArgs),
    /// Lab retention readings: site,top_cm,bottom_cm,sample,method,suction_<unit>|pf,theta|theta_pct|water_g_per_g[,measured_on,bulk_density_g_cm3,weight,notes,branch].
    ///
    /// Suction units: suction_cm, suction_hpa, suction_kpa, suction_mpa, suction_bar, pf.
    /// Sites, layers and samples a file names are created on first sight.
    #[command(
        after_help = "Examples:\n  porewise import lab spring.sqlite plates-kpa.csv dewpoint-pf.csv\n  \
         porewise import lab spring.sqlite results.xlsx --sheet Plates"
    )]
    Lab(LayerImportArgs),
    /// Measured conductivity: site,top_cm,bottom_cm,sample,method,suction_<unit>|pf|theta|theta_pct,conductivity_<unit>[,ks_<unit>,measured_on,notes].
    ///
    /// One K per row, at a suction (K(h)) or at a water content (K(theta)); units
    /// conductivity_cm_per_day, conductivity_cm_per_h, conductivity_mm_per_h,
    /// conductivity_m_per_s, stored in cm/day. ks_<unit> gives the core's measured saturated
    /// conductivity (one per sample). Sites, layers and samples are created on first sight.
    #[command(
        after_help = "Example:\n  porewise import conductivity spring.sqlite evaporation-k.csv"
    )]
    Conductivity(LayerImportArgs),
    /// Field logger records: site,depth_cm,sensor,sensor_id,time,value,unit (streamed), or
    /// wide files (a time column, then one column per channel) with --columns map.csv.
    ///
    /// sensor is tensiometer or water_content; unit (any case) is cm, hpa, kpa, mpa or bar for
    /// suction (a negative value is a pressure, stored as suction) or fraction, m3/m3,
    /// percent or % for water content. Times are ISO 8601 with an offset
    /// (2026-05-01T12:00:00+02:00, ...Z), or give --utc-offset for times without one; they are
    /// stored in UTC. Sites not in the campaign are created. Quality marks (beyond the
    /// tensiometer's working range, stuck, spike, a sign against the sensor's convention) are
    /// stored as suggested flags for review; no record is dropped.
    #[command(
        after_help = "Examples:\n  porewise import logger spring.sqlite station-a.csv\n  \
         porewise import logger spring.sqlite local-times.csv --utc-offset +01:00 --dry-run\n  \
         porewise import logger spring.sqlite may.csv --skip-duplicates --stuck-span 12h --spike 15kpa,5%\n  \
         porewise import logger spring.sqlite station-wide.csv --columns map.csv --skip-lines 3"
    )]
    Logger(super::logger::LoggerArgs),
}

/// Run `porewise import`.
///
/// # Errors
/// The campaign cannot be opened, or the files are refused (every problem listed; nothing
/// was written).
pub fn run(cmd: &ImportCommand) -> anyhow::Result<Outcome> {
    let (kind, args, allow_overlap) = match cmd {
        ImportCommand::Sites(a) => (ImportKind::Sites, a, false),
        ImportCommand::Layers(a) => (ImportKind::Layers, &a.import, a.allow_overlap),
        ImportCommand::Lab(a) => (ImportKind::Lab, &a.import, a.allow_overlap),
        ImportCommand::Conductivity(a) => (ImportKind::Conductivity, &a.import, a.allow_overlap),
        ImportCommand::Logger(a) => return super::logger::run(a),
    };
    let mut campaign = open(&args.db)?;
    let options = ImportOptions {
        dry_run: args.dry_run,
        force: args.force,
        strict: args.strict,
        allow_overlap,
    };
    let result = import::import_files_from(
        &mut campaign,
        kind,
        &args.files,
        options,
        args.sheet.as_deref(),
    );
    match &result {
        Ok(summary) => print_warnings(&summary.warnings),
        Err(ImportError::Invalid(diags)) => print_warnings(diags.warnings()),
        Err(_) => {}
    }
    println!("{}", result?);
    Ok(Outcome::Success)
}
