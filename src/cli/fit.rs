//! `porewise fit`: fit retention models to every sample of a plain pairs file, no database.

use std::path::{Path, PathBuf};

use anyhow::{Context, bail};
use clap::Args;
use rayon::prelude::*;

use indicatif::{ProgressBar, ProgressStyle};

use crate::analysis::texture::{PriorRule, default_rule, fit_campaign_with_prior};
use crate::analysis::{ModelChoice, fit_campaign_with, fit_choice};
use crate::error::Outcome;
use crate::fit::outliers::{OutlierOptions, OutlierSample, review};
use crate::fit::{FitOptions, Readings};
use crate::import::pairs::{PairSample, PairsFile, read_pairs_path};
use crate::model::conductivity::{ConductivityForm, ConductivityModel};
use crate::model::domain::LayerRef;
use crate::model::number::plural;
use crate::model::retention::{ModelKind, parse_assignment};
use crate::model::text::shown;
use crate::report::fit_table::{FitRow, to_csv, to_json};
use crate::report::review::{SuspectRow, suspects_csv};
use crate::report::write_atomic;
use crate::store::Campaign;
use crate::store::fits::Selection;

const AFTER_HELP: &str = "\
Examples:
  porewise fit spring.sqlite                         every sample, auto
  porewise fit spring.sqlite --site LEV1 --model brooks-corey --fix theta_r=0
  porewise fit --input lab.csv --model auto --fix theta_r=0 --output fits.csv
  porewise fit --input lab.csv --flag-outliers --flags-output suspects.csv
  porewise fit spring.sqlite --model brooks-corey --conductivity mualem
  porewise fit spring.sqlite --sample LV-Ap-a --prior texture
  porewise fit spring.sqlite --with-conductivity --model kosugi --ks measured

With a campaign file, each new fit becomes its sample's current one (older fits stay as
history: porewise list DB fits --sample CODE --all); a failed refit is recorded with its
reason and leaves the previous fit current but stale. Exit 3 when some samples failed.
With --prior texture the fit is van Genuchten with the layer's texture-class prior (a maximum
a posteriori fit; the readings-only fit is kept beside it in the report); fitting again with
--prior none makes the readings-only fit current. `porewise set DB --texture-prior N` makes
the prior the default for samples with at most N readings.

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
    /// Campaign file whose samples to fit (every sample unless --site, --layer or --sample).
    #[arg(value_name = "DB", conflicts_with_all = ["input", "output"])]
    pub db: Option<PathBuf>,
    /// Only the samples of this site (code); with DB.
    #[arg(long, value_name = "CODE", requires = "db")]
    pub site: Option<String>,
    /// Only the samples of this layer, as SITE:TOP-BOTTOM (e.g. LEV1:0-20); with DB.
    #[arg(long, value_name = "SITE:TOP-BOTTOM", requires = "db", value_parser = parse_layer)]
    pub layer: Option<LayerRef>,
    /// Only this sample (code; repeatable); with DB.
    #[arg(long = "sample", value_name = "CODE", requires = "db")]
    pub samples: Vec<String>,
    /// Plain pairs file: sample,suction_<unit>,theta (comma or semicolon separated).
    #[arg(long, value_name = "FILE")]
    pub input: Option<PathBuf>,
    /// Model identifier, or `auto` to fit every model and rank them by AICc
    /// (default: auto for a campaign, van-genuchten for --input).
    #[arg(long, value_name = "NAME")]
    pub model: Option<String>,
    /// Hold a parameter at a value, e.g. theta_r=0 (repeatable).
    #[arg(long = "fix", value_name = "NAME=VALUE")]
    pub fix: Vec<String>,
    /// Write the results to FILE.csv or FILE.json (written whole or not at all); default: CSV on stdout.
    #[arg(long, value_name = "FILE")]
    pub output: Option<PathBuf>,
    /// With --input: find suspect readings (noise estimated across the file), leave them out
    /// and fit the rest; the suspects are listed on stderr, or written with --flags-output.
    #[arg(long, requires = "input")]
    pub flag_outliers: bool,
    /// With --flag-outliers: write the suspects to FILE as CSV
    /// (sample,line,suction_cm,theta,reason,score; line = physical line of the input).
    #[arg(long, value_name = "FILE", requires = "flag_outliers")]
    pub flags_output: Option<PathBuf>,
    /// With DB: the conductivity form recorded with each fit and used for its derived K where
    /// the model has it (Brooks-Corey: burdine, the default, or mualem); the export names it.
    #[arg(long, value_name = "FORM", requires = "db", value_parser = parse_form)]
    pub conductivity: Option<ConductivityForm>,
    /// With DB: fit each sample's retention readings and measured conductivity together
    /// (Mualem forms; --model one of van-genuchten, the default here, van-genuchten-free-m,
    /// brooks-corey, kosugi, durner); samples without conductivity readings are left alone.
    #[arg(long, requires = "db", conflicts_with = "conductivity")]
    pub with_conductivity: bool,
    /// With --with-conductivity: the weight of the log10 K residuals against the water-content
    /// residuals (m3/m3); default: each set weighted by its own estimated noise.
    #[arg(long, value_name = "W", requires = "with_conductivity")]
    pub k_weight: Option<f64>,
    /// With --with-conductivity: `free` (default) estimates Ks; `measured` holds it at the
    /// sample's measured Ks, else its layer's.
    #[arg(long, value_name = "free|measured", requires = "with_conductivity", value_parser = parse_ks)]
    pub ks: Option<crate::analysis::joint::KsChoice>,
    /// With DB: `texture` fits van Genuchten with each sample's layer texture-class prior
    /// (Carsel & Parrish 1988; layers without sand/silt/clay get the readings-only fit);
    /// `none` fits the readings alone where the campaign default (porewise set
    /// --texture-prior N) would use the prior.
    #[arg(
        long,
        value_name = "texture|none",
        requires = "db",
        conflicts_with = "with_conductivity",
        value_parser = parse_prior
    )]
    pub prior: Option<PriorArg>,
}

/// The `--prior` choice.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum PriorArg {
    /// The layer's texture-class prior on every selected sample.
    Texture,
    /// No prior.
    None,
}

fn parse_prior(s: &str) -> Result<PriorArg, String> {
    match s.trim().to_ascii_lowercase().as_str() {
        "texture" => Ok(PriorArg::Texture),
        "none" => Ok(PriorArg::None),
        _ => Err(format!("`{s}`: expected texture or none")),
    }
}

fn parse_ks(s: &str) -> Result<crate::analysis::joint::KsChoice, String> {
    match s.trim().to_ascii_lowercase().as_str() {
        "free" => Ok(crate::analysis::joint::KsChoice::Free),
        "measured" => Ok(crate::analysis::joint::KsChoice::Measured),
        _ => Err(format!("{s:?}: expected free or measured")),
    }
}

fn parse_form(s: &str) -> Result<ConductivityForm, String> {
    s.parse()
}

fn parse_layer(s: &str) -> Result<LayerRef, String> {
    s.parse()
}

/// `porewise fit DB`: fit the selected samples of a campaign and record every attempt.
fn run_campaign(
    args: &FitArgs,
    db: &Path,
    choice: ModelChoice,
    options: &FitOptions,
) -> anyhow::Result<Outcome> {
    let mut campaign =
        Campaign::open(db).with_context(|| format!("cannot open campaign {}", db.display()))?;
    let selection = Selection {
        site: args.site.clone(),
        layer: args.layer.clone(),
        samples: args.samples.clone(),
    };
    let rule = match args.prior {
        Some(PriorArg::Texture) => PriorRule::Always,
        // The campaign default applies to auto and van Genuchten fits, not to another model
        // asked for by name nor to fits with parameters held (--fix).
        None => default_rule(campaign.connection(), choice, options)?,
        Some(PriorArg::None) => PriorRule::Never,
    };
    if rule != PriorRule::Never {
        return run_with_prior(args, &mut campaign, &selection, choice, options, rule);
    }
    let bar = ProgressBar::new(0).with_style(
        ProgressStyle::with_template("fitting {bar:30} {pos}/{len} samples ({eta} left)")
            .unwrap_or_else(|_| ProgressStyle::default_bar()),
    );
    if let (ModelChoice::One(kind), Some(form)) = (choice, args.conductivity) {
        ConductivityModel::select(kind, Some(form))
            .map_err(|e| anyhow::anyhow!("--conductivity {form}: {e}"))?;
    }
    let summary = fit_campaign_with(
        &mut campaign,
        &selection,
        choice,
        options,
        args.conductivity,
        &|done, total| {
            if done == 0 {
                // The readings are read; the campaign stays open to other writers until the
                // fits are written at the end.
                bar.suspend(|| {
                    eprintln!(
                        "fitting {} with {choice}; other commands can write to the campaign \
                         meanwhile; the fits are written when all are done",
                        plural(total as u64, "sample")
                    );
                });
            }
            bar.set_length(total as u64);
            bar.set_position(done as u64);
        },
    )?;
    bar.finish_and_clear();
    let changed = if summary.changed.is_empty() {
        String::new()
    } else {
        format!(
            "; {} not recorded (readings changed while fitting)",
            summary.changed.len()
        )
    };
    println!(
        "fitted {} with {choice}; {} failed{changed}",
        plural(summary.fitted.len() as u64, "sample"),
        summary.failed.len()
    );
    for (sample, reason) in &summary.failed {
        eprintln!("sample {}: not fitted: {}", shown(sample), shown(reason));
    }
    for sample in &summary.changed {
        eprintln!(
            "sample {sample}: not recorded: its readings changed while it was being fitted \
             (another command wrote to them); fit it again"
        );
    }
    Ok(if summary.is_complete() {
        Outcome::Success
    } else {
        Outcome::Partial
    })
}

/// `porewise fit DB` with the texture prior on the samples `rule` picks.
fn run_with_prior(
    args: &FitArgs,
    campaign: &mut Campaign,
    selection: &Selection,
    choice: ModelChoice,
    options: &FitOptions,
    rule: PriorRule,
) -> anyhow::Result<Outcome> {
    if rule == PriorRule::Always
        && !matches!(choice, ModelChoice::One(ModelKind::VanGenuchten))
        && args.model.is_some()
    {
        bail!(
            "--prior texture fits van Genuchten (the model of the texture-class table); \
             leave out --model {choice} or give --model van-genuchten"
        );
    }
    if rule == PriorRule::Always && !args.fix.is_empty() {
        bail!(
            "--prior texture fits all four van Genuchten parameters with their class prior; \
             it does not hold parameters (--fix): leave out one or the other"
        );
    }
    let summary = fit_campaign_with_prior(
        campaign,
        selection,
        choice,
        options,
        rule,
        args.conductivity,
        &|_, _| {},
    )?;
    let run = &summary.run;
    let why = match rule {
        PriorRule::AtMost(n) => format!(" (campaign default: samples with at most {n} readings)"),
        _ => String::new(),
    };
    println!(
        "fitted {}, {} of them with the texture prior{why} (readings' noise sd {} m3/m3); {} failed",
        plural(run.fitted.len() as u64, "sample"),
        summary.with_prior.len(),
        crate::report::format_number(summary.noise_sd),
        run.failed.len()
    );
    for (sample, layer) in &summary.no_texture {
        eprintln!(
            "sample {}: layer {} has no sand/silt/clay: fitted from the readings alone",
            shown(sample),
            shown(&layer.to_string())
        );
    }
    for (sample, reason) in &run.failed {
        eprintln!("sample {}: not fitted: {}", shown(sample), shown(reason));
    }
    for sample in &run.changed {
        eprintln!(
            "sample {sample}: not recorded: its readings changed while it was being fitted \
             (another command wrote to them); fit it again"
        );
    }
    Ok(if run.is_complete() {
        Outcome::Success
    } else {
        Outcome::Partial
    })
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
fn fixes(args: &FitArgs, choice: ModelChoice) -> anyhow::Result<FitOptions> {
    let mut options = FitOptions::new();
    for text in &args.fix {
        let (name, value) = parse_assignment(text).map_err(|e| anyhow::anyhow!("--fix: {e}"))?;
        match choice {
            ModelChoice::One(kind) => {
                kind.param_index(&name)
                    .map_err(|e| anyhow::anyhow!("--fix {text}: {e}"))?;
            }
            ModelChoice::Auto => {
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

/// Fit one sample of the plain file, leaving out the readings at the indices in `skip`.
fn fit_sample(
    sample: &PairSample,
    choice: ModelChoice,
    options: &FitOptions,
    skip: &[usize],
) -> FitRow {
    let kept = sample
        .readings
        .iter()
        .enumerate()
        .filter(|(i, _)| !skip.contains(i))
        .map(|(_, r)| r);
    let (h, theta): (Vec<f64>, Vec<f64>) = kept.map(|r| (r.h_cm, r.theta)).unzip();
    let attempt = fit_choice(choice, &Readings::new(&h, &theta), options);
    FitRow {
        sample: sample.name.clone(),
        model: attempt.model,
        report: attempt.report,
        message: attempt.message,
        auto: attempt.auto,
    }
}

/// Run the outlier checks over the samples of a pairs file; report the suspects (stderr, or
/// `--flags-output`) and return each sample's suspect indices.
///
/// The noise is one level for the whole file; suspects are judged with the model asked for
/// (van Genuchten for `auto`, which could bend to a wild reading).
fn flag_outliers(
    args: &FitArgs,
    input: &Path,
    file: &PairsFile,
    choice: ModelChoice,
    options: &FitOptions,
) -> anyhow::Result<Vec<Vec<usize>>> {
    let judge = match choice {
        ModelChoice::One(kind) => kind,
        ModelChoice::Auto => ModelKind::VanGenuchten,
    };
    let samples: Vec<OutlierSample> = file
        .samples
        .iter()
        .map(|s| {
            let mut o = OutlierSample::new(s.suctions(), s.thetas());
            o.model = Some(judge);
            o.options = options.clone();
            o
        })
        .collect();
    let result = review(&samples, &OutlierOptions::default());
    let mut suspects = Vec::new();
    let mut skips = Vec::with_capacity(file.samples.len());
    for (sample, checked) in file.samples.iter().zip(&result.samples) {
        let mut skip: Vec<usize> = checked.findings.iter().map(|f| f.index).collect();
        skip.sort_unstable();
        for finding in &checked.findings {
            let r = sample.readings[finding.index];
            suspects.push(SuspectRow {
                sample: sample.name.clone(),
                line: r.line,
                h_cm: r.h_cm,
                theta: r.theta,
                reason: finding.reason.clone(),
                score: finding.score,
            });
        }
        skips.push(skip);
    }
    suspects.sort_by_key(|s| s.line);
    if let Some(path) = &args.flags_output {
        let text = suspects_csv(&suspects).context("formatting the suspects as CSV")?;
        write_atomic(path, text.as_bytes())
            .with_context(|| format!("cannot write {}", path.display()))?;
    } else {
        for s in &suspects {
            eprintln!(
                "{}:{}: sample {}: left out (suction {} cm, theta {}): {}",
                input.display(),
                s.line,
                shown(&s.sample),
                crate::report::format_number(s.h_cm),
                crate::report::format_number(s.theta),
                shown(&s.reason)
            );
        }
    }
    eprintln!(
        "{} left out of the fits",
        plural(suspects.len() as u64, "suspect reading")
    );
    Ok(skips)
}

/// Run `porewise fit`.
///
/// # Errors
/// Bad input for the user (exit 1): no `--input`, an unreadable or invalid file (each problem
/// at `FILE:LINE:COLUMN`), an unknown model or parameter, an output that cannot be written.
pub fn run(args: &FitArgs) -> anyhow::Result<Outcome> {
    if let (true, Some(db)) = (args.with_conductivity, &args.db) {
        return super::fit_joint::run(args, db);
    }
    let choice: ModelChoice = args
        .model
        .as_deref()
        .unwrap_or(if args.db.is_some() {
            "auto"
        } else {
            "van-genuchten"
        })
        .parse()
        .map_err(|e| anyhow::anyhow!("--model: {e}"))?;
    let options = fixes(args, choice)?;
    if let Some(db) = &args.db {
        return run_campaign(args, db, choice, &options);
    }
    if args.conductivity.is_some() {
        bail!(
            "--conductivity applies to the fits of a campaign (porewise fit DB), whose derived \
             conductivity uses it; a plain file's fits have no conductivity values"
        );
    }
    let Some(input) = &args.input else {
        bail!(
            "nothing to fit: give a campaign file (porewise fit DB) or --input FILE \
             (a sample,suction_<unit>,theta file)"
        );
    };
    let format = format_of(args.output.as_ref())?;
    let file = read_pairs_path(input).map_err(|d| anyhow::anyhow!("{d}"))?;
    let skips: Vec<Vec<usize>> = if args.flag_outliers {
        flag_outliers(args, input, &file, choice, &options)?
    } else {
        vec![Vec::new(); file.samples.len()]
    };
    let rows: Vec<FitRow> = file
        .samples
        .par_iter()
        .zip(&skips)
        .map(|(s, skip)| fit_sample(s, choice, &options, skip))
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
            shown(&row.sample),
            shown(row.message().unwrap_or("no converged fit"))
        );
    }
    Ok(if partial {
        Outcome::Partial
    } else {
        Outcome::Success
    })
}
