//! `porewise curve`: tabulate a retention curve (and its conductivity) for given parameters.

use std::fmt::Write as _;
use std::io;

use anyhow::Context;
use clap::Args;

use crate::error::Outcome;
use crate::model::conductivity::ConductivityForm;
use crate::model::retention::{ModelKind, RetentionCurve, parse_assignment};
use crate::model::units::SuctionUnit;
use crate::report::curve_table::{
    ConductivitySpec, curve_rows, default_suctions_cm, suctions_to_cm, write_curve_csv,
};

/// The `--help` epilogue: an example and every model's parameters, from the model table.
fn after_help() -> String {
    let mut text = String::from(
        "Example:\n  porewise curve --model van-genuchten \\\n      \
         --set theta_r=0.078,theta_s=0.43,alpha_per_cm=0.036,n=1.56 \\\n      \
         --suction-kpa 10,33,1500 --ks-cm-per-day 24.96\n\nModels and their parameters:\n",
    );
    for kind in ModelKind::ALL {
        let names: Vec<&str> = kind.params().iter().map(|p| p.name).collect();
        let _ = writeln!(text, "  {:<22}{}", kind.id(), names.join(","));
    }
    text.push_str(
        "\nWith Ks the table adds Kr, K and the conductivity model used: Mualem (1976) for the van\n\
         Genuchten family, Kosugi and Durner, Burdine (1953) for Brooks-Corey unless\n\
         --conductivity mualem, Campbell's own form for Campbell; none for Fredlund-Xing.\n\
         \nEmpty cells mark values that do not apply (C(h) at a Brooks-Corey or Campbell break \
         point).\nCurves beyond the measured suction range are extrapolations; design uses \
         (irrigation,\nslope stability, covers) defer to local codes and licensed practice.",
    );
    text
}

/// Arguments of `porewise curve`.
#[derive(Debug, Args)]
#[command(after_help = after_help())]
pub struct CurveArgs {
    /// Retention model identifier (see the list below); not with --from.
    #[arg(
        long,
        value_name = "NAME",
        required_unless_present = "from",
        conflicts_with = "from"
    )]
    pub model: Option<String>,
    /// Tabulate the current fit of --sample in this campaign file instead of --model/--set; a
    /// fit made with measured conductivity adds K from its fitted Ks and L.
    #[arg(long, value_name = "DB", requires = "sample", conflicts_with = "set")]
    pub from: Option<std::path::PathBuf>,
    /// With --from: the sample whose current fit is tabulated.
    #[arg(long, value_name = "CODE", requires = "from")]
    pub sample: Option<String>,

    /// Parameter values as NAME=VALUE, comma-separated or repeated; every parameter is needed.
    #[arg(long = "set", value_name = "NAME=VALUE,...", value_delimiter = ',')]
    pub set: Vec<String>,

    /// Suctions in cm of water, comma-separated (default: five per decade, 1 to 10^6 cm).
    #[arg(
        long,
        value_name = "LIST",
        value_delimiter = ',',
        allow_negative_numbers = true,
        conflicts_with = "suction_kpa"
    )]
    pub suction_cm: Option<Vec<f64>>,

    /// Suctions in kPa, comma-separated (printed in cm).
    #[arg(
        long,
        value_name = "LIST",
        value_delimiter = ',',
        allow_negative_numbers = true
    )]
    pub suction_kpa: Option<Vec<f64>>,

    /// Saturated conductivity in cm/day: adds relative and absolute conductivity columns.
    #[arg(long, value_name = "X", allow_negative_numbers = true)]
    pub ks_cm_per_day: Option<f64>,

    /// Mualem pore-connectivity exponent L (default 0.5; Mualem conductivity forms only).
    #[arg(
        long,
        value_name = "L",
        requires = "ks_cm_per_day",
        allow_negative_numbers = true
    )]
    pub pore_connectivity: Option<f64>,

    /// Conductivity model: mualem or burdine (Brooks-Corey has both, Burdine by default; the
    /// van Genuchten family, Kosugi and Durner have Mualem's). The table names the one used.
    #[arg(long, value_name = "FORM", requires = "ks_cm_per_day", value_parser = parse_form)]
    pub conductivity: Option<ConductivityForm>,
}

fn parse_form(s: &str) -> Result<ConductivityForm, String> {
    s.parse()
}

/// Run `porewise curve`: print the table as CSV on stdout.
///
/// # Errors
/// An unknown model, a missing, unknown, repeated or out-of-bounds parameter, a bad suction,
/// Ks or L, or a failure to write stdout.
pub fn run(args: &CurveArgs) -> anyhow::Result<Outcome> {
    if let (Some(db), Some(code)) = (&args.from, &args.sample) {
        return run_from(args, db, code);
    }
    let kind: ModelKind = args.model.as_deref().unwrap_or_default().parse()?;
    let pairs = args
        .set
        .iter()
        .filter(|s| !s.trim().is_empty())
        .map(|s| parse_assignment(s))
        .collect::<Result<Vec<_>, _>>()
        .context("--set")?;
    let curve = RetentionCurve::from_pairs(kind, &pairs).context("--set")?;
    let suctions = match (&args.suction_cm, &args.suction_kpa) {
        (Some(cm), _) => suctions_to_cm(cm, SuctionUnit::Cm).context("--suction-cm")?,
        (None, Some(kpa)) => suctions_to_cm(kpa, SuctionUnit::Kpa).context("--suction-kpa")?,
        (None, None) => default_suctions_cm(),
    };
    let spec = args
        .ks_cm_per_day
        .map(|ks| ConductivitySpec::new(kind, ks, args.pore_connectivity, args.conductivity))
        .transpose()?;
    let rows = curve_rows(&curve, &suctions, spec);
    write_curve_csv(io::stdout().lock(), &rows, spec.map(|s| s.model))
        .context("writing the table")?;
    Ok(Outcome::Success)
}

/// `curve --from DB --sample CODE`: the sample's current fit; K from a joint fit's own Ks and
/// L (Ks and L options are refused there), or from --ks-cm-per-day for a retention-only fit.
fn run_from(args: &CurveArgs, db: &std::path::Path, code: &str) -> anyhow::Result<Outcome> {
    use crate::store::{Campaign, conductivity, fits, samples};
    let campaign =
        Campaign::open(db).with_context(|| format!("cannot open campaign {}", db.display()))?;
    let conn = campaign.connection();
    let sample = samples::find(conn, code)?.with_context(|| {
        format!(
            "no sample {code:?} in {}; `porewise list {0} samples` shows the codes",
            db.display()
        )
    })?;
    let fit = fits::current(conn, sample.id)?
        .with_context(|| format!("sample {code:?} has no current fit; fit it first"))?;
    let report = fit
        .report
        .as_ref()
        .with_context(|| format!("fit {} of sample {code:?} has no report", fit.id))?;
    let kind: ModelKind = fit.model.parse()?;
    let curve = RetentionCurve::new(kind, report.values()).context("the stored fit")?;
    let suctions = match (&args.suction_cm, &args.suction_kpa) {
        (Some(cm), _) => suctions_to_cm(cm, SuctionUnit::Cm).context("--suction-cm")?,
        (None, Some(kpa)) => suctions_to_cm(kpa, SuctionUnit::Kpa).context("--suction-kpa")?,
        (None, None) => default_suctions_cm(),
    };
    let spec = match conductivity::joint_of(conn, fit.id)? {
        Some(record) => {
            if args.ks_cm_per_day.is_some() || args.conductivity.is_some() {
                anyhow::bail!(
                    "fit {} of sample {code:?} was made with measured conductivity: its K uses \
                     the fitted Ks and L; leave out --ks-cm-per-day, --pore-connectivity and \
                     --conductivity",
                    fit.id
                );
            }
            let r = &record.report;
            Some(ConductivitySpec {
                model: r.conductivity_model,
                ks_cm_per_day: r.ks(),
                pore_connectivity: r.pore_connectivity(),
            })
        }
        None => args
            .ks_cm_per_day
            .map(|ks| ConductivitySpec::new(kind, ks, args.pore_connectivity, args.conductivity))
            .transpose()?,
    };
    let rows = curve_rows(&curve, &suctions, spec);
    write_curve_csv(io::stdout().lock(), &rows, spec.map(|s| s.model))
        .context("writing the table")?;
    Ok(Outcome::Success)
}
