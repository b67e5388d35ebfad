//! `porewise demo`: build the invented demo campaign from `demo-db/` and open it in the
//! terminal UI.

use std::path::{Path, PathBuf};

use anyhow::Context;
use clap::Args;

use crate::analysis::ModelChoice;
use crate::analysis::advise::{AdviseOptions, advise};
use crate::analysis::joint::{JointRequest, KsChoice, fit_campaign_joint};
use crate::analysis::review::{ReviewOptions, refresh};
use crate::analysis::texture::{PriorRule, fit_campaign_with_prior};

/// The demo campaign's texture-prior default: samples with at most this many readings.
const DEMO_PRIOR_MAX_READINGS: u32 = 5;
use crate::error::Outcome;
use crate::fit::FitOptions;
use crate::fit::joint::Weighting;
use crate::import::logger::{LoggerOptions, import_logger_files};
use crate::import::{ImportKind, ImportOptions, import_files};
use crate::model::number::significant;
use crate::model::retention::ModelKind;
use crate::store::campaign::{DEFAULT_FC_KPA, DEFAULT_PWP_KPA, remove_with_journal};
use crate::store::fits::Selection;
use crate::store::pairing::{PairOptions, pair_campaign};
use crate::store::{Campaign, migrate};

/// Arguments of `porewise demo`.
#[derive(Debug, Args)]
#[command(
    after_help = "Examples:\n  porewise demo            build demo-db/demo.sqlite if needed, then open it\n  porewise demo --no-ui    only build it"
)]
pub struct DemoArgs {
    /// Only build the demo campaign file; do not open the terminal UI.
    #[arg(long)]
    pub no_ui: bool,
    /// Folder holding the demo source files (default: ./demo-db, else the one beside the sources).
    #[arg(long, value_name = "DIR")]
    pub dir: Option<PathBuf>,
    /// Rewrite the demo source CSV files from the seeded generator, then build.
    #[arg(long, hide = true)]
    pub write_sources: bool,
}

/// Where the demo sources live: `--dir`, else `./demo-db`, else the crate's own `demo-db/`.
fn demo_dir(args: &DemoArgs) -> PathBuf {
    if let Some(dir) = &args.dir {
        return dir.clone();
    }
    let local = PathBuf::from("demo-db");
    if local.is_dir() {
        return local;
    }
    Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-db")
}

/// Write the generated source files into `dir`.
fn write_sources(dir: &Path) -> anyhow::Result<()> {
    std::fs::create_dir_all(dir).with_context(|| format!("cannot create {}", dir.display()))?;
    for file in crate::demo::generate() {
        let path = dir.join(file.name);
        std::fs::write(&path, file.text)
            .with_context(|| format!("cannot write {}", path.display()))?;
    }
    Ok(())
}

/// The campaign file built from the sources in `dir`.
pub fn demo_file(dir: &Path) -> PathBuf {
    dir.join(DEMO_FILE)
}

/// File name of the built demo campaign inside the demo folder (ignored by git).
const DEMO_FILE: &str = "demo.sqlite";

/// The demo's source files: the tables in import order (sites, layers, then the lab sheets)
/// and the field logger files.
#[derive(Debug, Clone, PartialEq)]
struct Sources {
    tables: Vec<(ImportKind, Vec<PathBuf>)>,
    loggers: Vec<PathBuf>,
}

impl Sources {
    /// Every file, for the freshness check.
    fn paths(&self) -> impl Iterator<Item = &PathBuf> {
        self.tables
            .iter()
            .flat_map(|(_, paths)| paths)
            .chain(&self.loggers)
    }
}

/// The sources in `dir`: `sites.csv`, `layers.csv`, every `lab-*.csv`, every
/// `conductivity-*.csv` and every `logger-*.csv`.
fn sources(dir: &Path) -> anyhow::Result<Sources> {
    let mut labs = Vec::new();
    let mut loggers = Vec::new();
    let mut conductivity = Vec::new();
    for entry in std::fs::read_dir(dir).with_context(|| format!("cannot read {}", dir.display()))? {
        let path = entry?.path();
        let is_csv = path
            .extension()
            .is_some_and(|e| e.eq_ignore_ascii_case("csv"));
        let name = path
            .file_name()
            .map(|n| n.to_string_lossy().into_owned())
            .unwrap_or_default();
        if is_csv && name.starts_with("lab-") {
            labs.push(path);
        } else if is_csv && name.starts_with("logger-") {
            loggers.push(path);
        } else if is_csv && name.starts_with("conductivity-") {
            conductivity.push(path);
        }
    }
    labs.sort();
    loggers.sort();
    conductivity.sort();
    Ok(Sources {
        tables: vec![
            (ImportKind::Sites, vec![dir.join("sites.csv")]),
            (ImportKind::Layers, vec![dir.join("layers.csv")]),
            (ImportKind::Lab, labs),
            (ImportKind::Conductivity, conductivity),
        ],
        loggers,
    })
}

/// Why the demo file must be (re)built, or `None` when it is up to date.
fn rebuild_reason(file: &Path, sources: &Sources) -> Option<String> {
    let Ok(built) = std::fs::metadata(file).and_then(|m| m.modified()) else {
        return Some("it does not exist yet".to_string());
    };
    for path in sources.paths() {
        let newer = std::fs::metadata(path)
            .and_then(|m| m.modified())
            .is_ok_and(|t| t > built);
        if newer {
            return Some(format!("{} is newer", path.display()));
        }
    }
    // Read the version before opening it as a campaign (which would upgrade it in place and
    // skip the build steps a newer schema brings, such as the stored review queue).
    let version =
        rusqlite::Connection::open_with_flags(file, rusqlite::OpenFlags::SQLITE_OPEN_READ_ONLY)
            .map_err(|_| ())
            .and_then(|c| migrate::schema_version(&c).map_err(|_| ()));
    match version {
        Ok(v) if v == migrate::latest_version() => match Campaign::open(file) {
            Ok(_) => None,
            Err(_) => Some("it cannot be opened".to_string()),
        },
        Ok(_) => Some("its schema is older than this program".to_string()),
        Err(()) => Some("it cannot be opened".to_string()),
    }
}

/// Build the demo campaign into `file` from `sources`, through the normal import path: the
/// tables, then the field logger files (with their quality marks), paired into a field
/// sample per logged depth; fit every sample (`auto`) so it opens with curves, and run the
/// outlier review so the planted bad readings wait in the queue.
///
/// Builds into a temporary file beside it and renames it into place, so an interrupted build
/// leaves no half-made campaign.
fn build(file: &Path, sources: &Sources) -> anyhow::Result<()> {
    let building = file.with_extension("sqlite.building");
    remove_with_journal(&building);
    {
        let mut campaign = Campaign::create(
            &building,
            "Floodplain demo (invented)",
            DEFAULT_FC_KPA,
            DEFAULT_PWP_KPA,
        )?;
        for (kind, paths) in &sources.tables {
            import_files(&mut campaign, *kind, paths, ImportOptions::default())
                .with_context(|| format!("cannot import the demo {} files", kind.as_str()))?;
        }
        if !sources.loggers.is_empty() {
            let logged = import_logger_files(
                &mut campaign,
                &sources.loggers,
                LoggerOptions::default(),
                &mut (),
            )
            .context("cannot import the demo logger files")?;
            let paired = pair_campaign(&mut campaign, &PairOptions::default())
                .context("cannot pair the demo logger records")?;
            eprintln!(
                "logger: {} records, {} quality marks; paired into {}",
                logged.records_added(),
                logged.flags(),
                paired
                    .paired
                    .iter()
                    .map(|p| format!("{} ({} readings)", p.sample, p.readings))
                    .collect::<Vec<_>>()
                    .join(", ")
            );
        }
        // The texture prior by default for samples with at most 5 readings: the four-reading
        // core gets van Genuchten with its loam prior; the rest are fitted by auto. A second
        // pass refits the prior's samples with the campaign's pooled noise.
        {
            let tx = campaign.transaction()?;
            crate::store::texture::set_prior_default(&tx, Some(DEMO_PRIOR_MAX_READINGS))?;
            tx.commit()?;
        }
        let rule = PriorRule::AtMost(DEMO_PRIOR_MAX_READINGS);
        let first = fit_campaign_with_prior(
            &mut campaign,
            &Selection::all(),
            ModelChoice::Auto,
            &FitOptions::new(),
            rule,
            None,
            &|_, _| {},
        )?;
        let sparse = Selection {
            samples: first.with_prior.iter().map(|(s, _)| s.clone()).collect(),
            ..Selection::default()
        };
        if !sparse.samples.is_empty() {
            fit_campaign_with_prior(
                &mut campaign,
                &sparse,
                ModelChoice::Auto,
                &FitOptions::new(),
                rule,
                None,
                &|_, _| {},
            )?;
        }
        let fits = &first.run;
        eprintln!(
            "fitted {} samples (auto; {} with the texture prior){}",
            fits.fitted.len(),
            first.with_prior.len(),
            if fits.failed.is_empty() {
                String::new()
            } else {
                format!("; {} could not be fitted", fits.failed.len())
            }
        );
        let review = refresh(&mut campaign, &Selection::all(), &ReviewOptions::default())?;
        eprintln!(
            "review: {} suspect readings wait in the queue (porewise review {})",
            review.raised,
            file.display()
        );
        // The cores with measured conductivity are fitted again with it (after the review, whose
        // refits are retention-only): their joint fit becomes current, the auto fit stays in
        // the history.
        let (joint, _) = fit_campaign_joint(
            &mut campaign,
            &Selection::all(),
            &JointRequest {
                kind: ModelKind::VanGenuchten,
                fixed: Vec::new(),
                ks: KsChoice::Free,
                weighting: Weighting::Estimated,
            },
            &|_, _| {},
        )?;
        eprintln!(
            "conductivity: {} cores fitted with their measured K (porewise list {} \
             conductivity-fits)",
            joint.fitted.len(),
            file.display()
        );
        let settings = campaign.settings()?;
        let advice = advise(
            campaign.connection(),
            &settings,
            &Selection::all(),
            &AdviseOptions::default(),
        )?;
        if let Some(top) = advice.ranked.first() {
            let a = &top.advice;
            eprintln!(
                "advice: one more reading pays most on {}: {} cm would take its available \
                 water ±{} to ±{} m3/m3 (porewise advise {})",
                crate::model::text::shown(&top.sample.code),
                significant(a.best_step().h_cm, 4).unwrap_or_default(),
                significant(a.now, 2).unwrap_or_default(),
                significant(a.best_step().after, 2).unwrap_or_default(),
                file.display()
            );
        }
    }
    remove_with_journal(file);
    std::fs::rename(&building, file)
        .with_context(|| format!("cannot move the demo campaign into {}", file.display()))?;
    Ok(())
}

/// Make sure the demo campaign in `dir` is built and current; returns its path.
///
/// # Errors
/// Missing or unreadable sources, or a failed import (which would be a bug in the generator).
pub fn ensure_built(dir: &Path) -> anyhow::Result<PathBuf> {
    let file = demo_file(dir);
    let sources = sources(dir)?;
    if let Some(reason) = rebuild_reason(&file, &sources) {
        eprintln!("building {} ({reason})", file.display());
        build(&file, &sources)?;
    }
    Ok(file)
}

/// Run `porewise demo`.
///
/// # Errors
/// A demo folder that cannot be read or written, or a failed build.
pub fn run(args: &DemoArgs) -> anyhow::Result<Outcome> {
    let dir = demo_dir(args);
    if args.write_sources {
        write_sources(&dir)?;
        eprintln!("wrote the demo source files into {}", dir.display());
    }
    let file = ensure_built(&dir)?;
    if args.no_ui {
        eprintln!("demo campaign ready: {}", file.display());
        return Ok(Outcome::Success);
    }
    crate::tui::run(&file)?;
    Ok(Outcome::Success)
}
