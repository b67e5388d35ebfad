//! `porewise import logger`: stream field logger files into a campaign, with a progress bar
//! on a terminal.

use clap::Args;
use indicatif::{ProgressBar, ProgressDrawTarget, ProgressStyle};
use std::io::IsTerminal;
use std::path::PathBuf;

use super::shared::ImportArgs;
use crate::error::Outcome;
use crate::field::quality::{
    DEFAULT_SPIKE_RECORDS, DEFAULT_TENSIOMETER_LIMIT_KPA, QualitySettings, SpikeJump, parse_spike,
};
use crate::field::time::{parse_offset, parse_span};
use crate::import::logger::{LoggerOptions, Progress, import_logger_files_mapped};
use crate::import::wide::ChannelMap;
use crate::import::{ImportError, Source};
use crate::model::units::CM_PER_KPA;

/// The campaign file, the logger files and how to import them.
#[derive(Debug, Args)]
pub struct LoggerArgs {
    /// The campaign, the files, --dry-run and --force, as for every import.
    #[command(flatten)]
    pub import: ImportArgs,
    /// Skip a record whose sensor already has one at that time (otherwise an error).
    #[arg(long)]
    pub skip_duplicates: bool,
    /// UTC offset of times written without one, e.g. +01:00 (times with an offset keep theirs).
    #[arg(long, value_name = "+HH:MM", value_parser = parse_offset, allow_hyphen_values = true)]
    pub utc_offset: Option<i32>,
    /// Mark tensiometer suction above this, kPa (the working range; `off` turns it off).
    #[arg(long, value_name = "KPA", default_value = "85", value_parser = parse_limit)]
    pub tensiometer_limit_kpa: Limit,
    /// Mark a sensor that repeats the same value this long (e.g. 6h, 90m; `off`).
    #[arg(long, value_name = "SPAN", default_value = "6h", value_parser = parse_stuck)]
    pub stuck_span: Stuck,
    /// Spike jumps: a suction (10kpa, 100cm) for tensiometers and/or a water content
    /// (0.05, 5%) for water-content sensors; `off` turns the check off.
    #[arg(
        long,
        value_name = "JUMP",
        value_delimiter = ',',
        default_value = "10kpa,0.05",
        value_parser = parse_spike
    )]
    pub spike: Vec<SpikeJump>,
    /// Read wide files (a time column, then one column per channel) with this mapping file:
    /// column,site,depth_cm,sensor,sensor_id,unit, one row per channel column.
    #[arg(long, value_name = "MAP.CSV")]
    pub columns: Option<PathBuf>,
    /// Skip this many lines of logger preamble before the header (line numbers in messages
    /// still count them).
    #[arg(long, value_name = "N", default_value_t = 0)]
    pub skip_lines: u64,
    /// A spike comes back within this many records; a longer excursion is a real change.
    #[arg(long, value_name = "N", default_value_t = DEFAULT_SPIKE_RECORDS,
          value_parser = super::pair::parse_count)]
    pub spike_records: usize,
}

/// The tensiometer working range, kPa, or none.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Limit(pub Option<f64>);

/// The stuck span, seconds, or none.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Stuck(pub Option<i64>);

fn parse_limit(s: &str) -> Result<Limit, String> {
    if s.trim().eq_ignore_ascii_case("off") {
        return Ok(Limit(None));
    }
    match s.trim().parse::<f64>() {
        Ok(v) if v.is_finite() && v > 0.0 => Ok(Limit(Some(v))),
        _ => Err(format!(
            "found {s:?}, expected a suction in kPa above 0 (about {DEFAULT_TENSIOMETER_LIMIT_KPA} \
             is the usual working range), or off"
        )),
    }
}

fn parse_stuck(s: &str) -> Result<Stuck, String> {
    if s.trim().eq_ignore_ascii_case("off") {
        return Ok(Stuck(None));
    }
    parse_span(s).map(|v| Stuck(Some(v)))
}

impl LoggerArgs {
    /// The import options these arguments ask for.
    pub fn options(&self) -> LoggerOptions {
        let mut quality = QualitySettings {
            tensiometer_limit_cm: self.tensiometer_limit_kpa.0.map(|k| k * CM_PER_KPA),
            stuck_span_s: self.stuck_span.0,
            spike_records: self.spike_records,
            ..QualitySettings::default()
        };
        for jump in &self.spike {
            match *jump {
                SpikeJump::Suction(cm) => quality.spike_suction_cm = Some(cm),
                SpikeJump::Theta(t) => quality.spike_theta = Some(t),
                SpikeJump::Off => {
                    quality.spike_suction_cm = None;
                    quality.spike_theta = None;
                }
            }
        }
        LoggerOptions {
            dry_run: self.import.dry_run,
            force: self.import.force,
            skip_duplicates: self.skip_duplicates,
            utc_offset_s: self.utc_offset,
            quality,
            strict: self.import.strict,
            skip_lines: self.skip_lines,
        }
    }
}

/// A progress bar on stderr, drawn only when stderr is a terminal.
struct Bar {
    bar: Option<ProgressBar>,
}

impl Bar {
    fn new() -> Self {
        Self {
            bar: std::io::stderr().is_terminal().then(|| {
                let bar = ProgressBar::with_draw_target(Some(0), ProgressDrawTarget::stderr());
                if let Ok(style) = ProgressStyle::with_template(
                    "{msg} [{bar:30}] {bytes}/{total_bytes} {bytes_per_sec} eta {eta}",
                ) {
                    bar.set_style(style.progress_chars("=> "));
                }
                bar
            }),
        }
    }
}

impl Progress for Bar {
    fn file(&mut self, name: &str, bytes: u64) {
        if let Some(b) = &self.bar {
            b.set_length(bytes);
            b.set_position(0);
            b.set_message(name.to_string());
        }
    }

    fn read(&mut self, bytes: u64) {
        if let Some(b) = &self.bar {
            b.set_position(bytes);
        }
    }

    fn done(&mut self) {
        if let Some(b) = &self.bar {
            b.finish_and_clear();
        }
    }
}

/// Run `porewise import logger`.
///
/// # Errors
/// The campaign cannot be opened, or the files are refused (every problem listed; nothing
/// was written).
pub fn run(args: &LoggerArgs) -> anyhow::Result<Outcome> {
    if args.import.sheet.is_some() {
        anyhow::bail!(
            "--sheet is for lab, sites and layers workbooks; logger files are CSV (wide ones \
             with --columns)"
        );
    }
    if let Some(book) = args
        .import
        .files
        .iter()
        .find(|f| crate::import::workbook::is_workbook(&f.display().to_string()))
    {
        anyhow::bail!(
            "{}: logger files are read as CSV text, streamed (a workbook is read whole); save \
             the sheet as CSV first",
            book.display()
        );
    }
    let map = match &args.columns {
        Some(path) => {
            let source = Source::read(path)?;
            Some(
                ChannelMap::read(&source.name, source.bytes.as_slice())
                    .map_err(ImportError::Invalid)?,
            )
        }
        None => None,
    };
    let mut campaign = super::shared::open(&args.import.db)?;
    let mut bar = Bar::new();
    let summary = import_logger_files_mapped(
        &mut campaign,
        &args.import.files,
        args.options(),
        map.as_ref(),
        &mut bar,
    );
    bar.done();
    match &summary {
        Ok(s) => super::shared::print_warnings(&s.warnings),
        Err(ImportError::Invalid(diags)) => super::shared::print_warnings(diags.warnings()),
        Err(_) => {}
    }
    println!("{}", summary?);
    Ok(Outcome::Success)
}
