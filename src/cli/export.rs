//! `porewise export`: write the campaign summary (tables, JSON, GeoJSON, HTML report) into a
//! folder.

use crate::model::conductivity::ConductivityForm;
use std::path::PathBuf;

use anyhow::Context;
use clap::Args;
use indicatif::{ProgressBar, ProgressStyle};

use crate::analysis::water::DEFAULT_ROOT_ZONE_CM;
use crate::error::Outcome;
use crate::model::number::plural;
use crate::report::export::{ExportFormat, ExportOptions, export_campaign};
use crate::store::Campaign;

/// Arguments of `porewise export`.
#[derive(Debug, Args)]
#[command(
    after_help = "Writes parameters.csv, profiles.csv, campaign.json, sites.geojson and report.html.\n\
                  DIR is created when missing, or replaced as a whole (never a mix of two exports);\n\
                  a folder holding other files than an earlier export's is refused.\n\n\
                  Examples:\n  porewise export spring.sqlite --to spring-summary\n  \
                  porewise export spring.sqlite --to lv --site LV --format csv,html\n  \
                  porewise export spring.sqlite --to out --root-zone-cm 60"
)]
pub struct ExportArgs {
    /// The campaign file.
    pub db: PathBuf,
    /// The folder to write into.
    #[arg(long, value_name = "DIR")]
    pub to: PathBuf,
    /// What to write, comma separated: csv (parameters.csv, profiles.csv), json, geojson, html.
    #[arg(
        long,
        value_name = "LIST",
        value_delimiter = ',',
        default_value = "csv,json,geojson,html",
        value_parser = parse_format
    )]
    pub format: Vec<ExportFormat>,
    /// Only this site (code).
    #[arg(long, value_name = "CODE")]
    pub site: Option<String>,
    /// The depth down to which profile available water is summed, cm.
    #[arg(long, value_name = "CM", default_value_t = DEFAULT_ROOT_ZONE_CM)]
    pub root_zone_cm: f64,
    /// Conductivity form for K values where a fit's model has it (Brooks-Corey: burdine or
    /// mualem); default: the form each fit was made with. campaign.json names the model used.
    #[arg(long, value_name = "FORM", value_parser = parse_form)]
    pub conductivity: Option<ConductivityForm>,
}

fn parse_form(s: &str) -> Result<ConductivityForm, String> {
    s.parse()
}

fn parse_format(s: &str) -> Result<ExportFormat, String> {
    s.parse()
}

/// Run `porewise export`.
///
/// # Errors
/// The campaign cannot be opened, the site is unknown, the folder is refused, or a file
/// cannot be written.
pub fn run(args: &ExportArgs) -> anyhow::Result<Outcome> {
    let campaign = Campaign::open(&args.db)
        .with_context(|| format!("cannot open campaign {}", args.db.display()))?;
    super::list::warn_unreadable(campaign.connection())?;
    let options = ExportOptions::new(&args.to)
        .with_formats(&args.format)
        .with_site(args.site.clone())
        .with_root_zone_cm(args.root_zone_cm)
        .with_conductivity(args.conductivity);
    let bar = ProgressBar::new(0).with_style(
        ProgressStyle::with_template("exporting {bar:30} {pos}/{len}")
            .unwrap_or_else(|_| ProgressStyle::default_bar()),
    );
    let summary = export_campaign(campaign.connection(), &options, &|done, total| {
        bar.set_length(total as u64);
        bar.set_position(done as u64);
    })?;
    bar.finish_and_clear();
    println!(
        "exported {}, {} and {} into {}",
        plural(summary.sites as u64, "site"),
        plural(summary.samples as u64, "sample"),
        plural(summary.readings as u64, "reading"),
        summary.dir.display()
    );
    for path in &summary.written {
        println!("  {}", path.display());
    }
    for path in &summary.removed_from_before {
        eprintln!(
            "note: {} of the earlier export is gone: its format was not asked for this time, \
             and the folder holds one export, never a mix of two",
            path.display()
        );
    }
    Ok(Outcome::Success)
}
