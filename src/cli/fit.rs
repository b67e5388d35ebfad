//! `porewise fit`: fit retention models to every sample of a plain pairs file, no database.

use std::path::PathBuf;
use std::str::FromStr;

use anyhow::{Context, bail};
use clap::Args;
use rayon::prelude::*;

use crate::error::Outcome;
use crate::fit::{FitOptions, Readings, fit_auto, fit_model};
use crate::import::pairs::{PairSample, read_pairs_path};
use crate::model::retention::{ModelKind, parse_assignment};
use crate::report::fit_table::{FitRow, to_csv, to_json};
use crate::report::write_atomic;

const AFTER_HELP: &str = "\
Example:
  porewise fit --input lab.csv --model auto --fix theta_r=0 --output fits.csv

The input has a header row with `sample`, one suction column (suction_cm, suction_hpa,
suction_kpa, suction_mpa, suction_bar or pf) and `theta` (m3/m3) or `theta_pct`; other
columns are ignored. Models: van-genuchten (default), van-genuchten-free-m, brooks-corey,
kosugi, fredlund-xing, durner, campbell, or auto (every model the readings allow, ranked by
AICc; the output then has a `ranking` column). Exit status: 0 all fitted, 3 some samples
could not be fitted (listed on stderr), 1 bad input.

Caution: fitted parameters are estimates from few points and uncertain outside the measured
suctions; designs (irrigation, slope stability, covers) defer to local codes and licensed practice.";

/// Arguments of `porewise fit`.
#[derive(Debug, Args)]
#[command(after_help = AFTER_HELP)]
pub struct FitArgs {
    /// Plain pairs file: sample,suction_<unit>,theta (comma or semicolon separated).
    #[arg(long, value_name = "FILE")]
    pub input: Option<PathBuf>,
    /// Model identifier, or `auto` to fit every model and rank them by AICc.
    #[arg(long, value_name = "NAME", default_value = "van-genuchten")]
    pub model: String,
    /// Hold a parameter at a value, e.g. theta_r=0 (repeatable).
    #[arg(long = "fix", value_name = "NAME=VALUE")]
    pub fix: Vec<String>,
    /// Write the results to FILE.csv or FILE.json (written whole or not at all); default: CSV on stdout.
    #[arg(long, value_name = "FILE")]
    pub output: Option<PathBuf>,
}

/// What to fit: one model or all of them.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Choice {
    One(ModelKind),
    Auto,
}

/// Output format, from the output file's extension.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Format {
    Csv,
    Json,
}

fn format_of(path: Option<&PathBuf>) -> anyhow::Result<Format> {
    let Some(path) = path else {
        return Ok(Format::Csv);
    };
    match path
        .extension()
        .and_then(|e| e.to_str())
        .map(str::to_ascii_lowercase)
        .as_deref()
    {
        Some("csv") => Ok(Format::Csv),
        Some("json") => Ok(Format::Json),
        _ => bail!(
            "--output {}: expected a file name ending in .csv or .json",
            path.display()
        ),
    }
}

/// Parse `--fix` values and check each name against the model(s).
fn fixes(args: &FitArgs, choice: Choice) -> anyhow::Result<FitOptions> {
    let mut options = FitOptions::new();
    for text in &args.fix {
        let (name, value) = parse_assignment(text).map_err(|e| anyhow::anyhow!("--fix: {e}"))?;
        match choice {
            Choice::One(kind) => {
                kind.param_index(&name)
                    .map_err(|e| anyhow::anyhow!("--fix {text}: {e}"))?;
            }
            Choice::Auto => {
                if !ModelKind::ALL
                    .iter()
                    .any(|k| k.params().iter().any(|p| p.name == name))
                {
                    bail!("--fix {text}: no model has a parameter {name:?}");
                }
            }
        }
        options = options.with_fixed(&name, value);
    }
    Ok(options)
}

/// Fit one sample.
fn fit_sample(sample: &PairSample, choice: Choice, options: &FitOptions) -> FitRow {
    let h = sample.suctions();
    let theta = sample.thetas();
    let readings = Readings::new(&h, &theta);
    match choice {
        Choice::One(kind) => match fit_model(kind, &readings, options) {
            Ok(report) => FitRow {
                sample: sample.name.clone(),
                model: kind.id().to_string(),
                report: Some(report),
                message: None,
                auto: None,
            },
            Err(e) => FitRow {
                sample: sample.name.clone(),
                model: kind.id().to_string(),
                report: None,
                message: Some(e.to_string()),
                auto: None,
            },
        },
        Choice::Auto => {
            let auto = fit_auto(&ModelKind::ALL, &readings, options);
            let (model, report, message) = match (auto.best(), &auto.fallback) {
                (Some(best), _) => (best.model.clone(), Some(best.clone()), None),
                (None, Some(f)) => (f.model.clone(), Some(f.clone()), None),
                (None, None) => (
                    "auto".to_string(),
                    None,
                    Some(
                        auto.skipped
                            .iter()
                            .map(|s| format!("{}: {}", s.model, s.reason))
                            .collect::<Vec<_>>()
                            .join("; "),
                    ),
                ),
            };
            FitRow {
                sample: sample.name.clone(),
                model,
                report,
                message,
                auto: Some(auto),
            }
        }
    }
}

/// Run `porewise fit`.
///
/// # Errors
/// Bad input for the user (exit 1): no `--input`, an unreadable or invalid file (each problem
/// at `FILE:LINE:COLUMN`), an unknown model or parameter, an output that cannot be written.
pub fn run(args: &FitArgs) -> anyhow::Result<Outcome> {
    let Some(input) = &args.input else {
        bail!("nothing to fit: give --input FILE (a sample,suction_<unit>,theta file)");
    };
    let choice = if args.model.trim().eq_ignore_ascii_case("auto") {
        Choice::Auto
    } else {
        Choice::One(ModelKind::from_str(&args.model).map_err(|e| anyhow::anyhow!("--model: {e}"))?)
    };
    let options = fixes(args, choice)?;
    let format = format_of(args.output.as_ref())?;
    let file = read_pairs_path(input).map_err(|d| anyhow::anyhow!("{d}"))?;
    let rows: Vec<FitRow> = file
        .samples
        .par_iter()
        .map(|s| fit_sample(s, choice, &options))
        .collect();
    let text = match format {
        Format::Csv => to_csv(&rows).context("formatting the results as CSV")?,
        Format::Json => to_json(&rows).context("formatting the results as JSON")?,
    };
    if let Some(path) = &args.output {
        write_atomic(path, text.as_bytes())
            .with_context(|| format!("cannot write {}", path.display()))?;
    } else {
        use std::io::Write;
        let mut out = std::io::stdout().lock();
        out.write_all(text.as_bytes())
            .and_then(|()| out.flush())
            .context("cannot write to standard output")?;
    }
    let mut partial = false;
    for row in rows.iter().filter(|r| !r.is_fitted()) {
        partial = true;
        eprintln!(
            "sample {}: not fitted: {}",
            row.sample,
            row.message().unwrap_or("no converged fit")
        );
    }
    Ok(if partial {
        Outcome::Partial
    } else {
        Outcome::Success
    })
}
