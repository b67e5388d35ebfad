//! `porewise fit DB --with-conductivity`: retention and measured conductivity fitted together.

use std::path::Path;

use anyhow::{Context, bail};

use super::fit::FitArgs;
use crate::analysis::joint::{JointRequest, fit_campaign_joint, requested_text};
use crate::error::Outcome;
use crate::fit::joint::{KS_SPEC, PORE_CONNECTIVITY_SPEC, Weighting, joint_conductivity_model};
use crate::model::number::plural;
use crate::model::retention::{ModelKind, parse_assignment};
use crate::model::text::shown;
use crate::store::Campaign;
use crate::store::fits::Selection;

/// Run the joint fits of a campaign's selected samples.
///
/// # Errors
/// A model without a Mualem form or `auto`, an unknown parameter, a bad weight, or a
/// campaign that cannot be opened or written.
pub fn run(args: &FitArgs, db: &Path) -> anyhow::Result<Outcome> {
    let name = args.model.as_deref().unwrap_or("van-genuchten");
    if name.trim().eq_ignore_ascii_case("auto") {
        bail!(
            "--with-conductivity fits one model: give --model van-genuchten, \
             van-genuchten-free-m, brooks-corey, kosugi or durner (auto ranks retention-only fits)"
        );
    }
    let kind: ModelKind = name.parse().map_err(|e| anyhow::anyhow!("--model: {e}"))?;
    if joint_conductivity_model(kind).is_none() {
        bail!(
            "--with-conductivity: {} has no Mualem conductivity form; use van-genuchten, \
             van-genuchten-free-m, brooks-corey, kosugi or durner",
            kind.display_name()
        );
    }
    let mut fixed = Vec::new();
    for text in &args.fix {
        let (name, value) = parse_assignment(text).map_err(|e| anyhow::anyhow!("--fix: {e}"))?;
        let spec = [KS_SPEC, PORE_CONNECTIVITY_SPEC]
            .into_iter()
            .find(|s| s.name == name);
        match spec {
            Some(s) => {
                if !(value >= s.lower && value <= s.upper) {
                    bail!(
                        "--fix {text}: expected {} from {} to {} {}",
                        s.name,
                        s.lower,
                        s.upper,
                        s.unit
                    );
                }
            }
            None => {
                kind.param_index(&name)
                    .map_err(|e| anyhow::anyhow!("--fix {text}: {e}"))?;
            }
        }
        fixed.push((name, value));
    }
    if args.ks == Some(crate::analysis::joint::KsChoice::Measured)
        && fixed.iter().any(|(n, _)| n == KS_SPEC.name)
    {
        bail!("--ks measured and --fix ks_cm_per_day=...: give one");
    }
    let weighting = match args.k_weight {
        None => Weighting::Estimated,
        Some(w) if w.is_finite() && w > 0.0 => Weighting::User { weight: w },
        Some(w) => bail!("--k-weight {w}: expected a finite number above 0"),
    };
    let mut campaign =
        Campaign::open(db).with_context(|| format!("cannot open campaign {}", db.display()))?;
    let selection = Selection {
        site: args.site.clone(),
        layer: args.layer.clone(),
        samples: args.samples.clone(),
    };
    let request = JointRequest {
        kind,
        fixed,
        ks: args.ks.unwrap_or_default(),
        weighting,
    };
    let (summary, skipped) = fit_campaign_joint(&mut campaign, &selection, &request, &|_, _| {})?;
    println!(
        "fitted {} with {}; {} failed; {} without conductivity readings left alone",
        plural(summary.fitted.len() as u64, "sample"),
        requested_text(kind),
        summary.failed.len(),
        plural(skipped.len() as u64, "sample")
    );
    for (sample, reason) in &summary.failed {
        eprintln!("sample {}: not fitted: {}", shown(sample), shown(reason));
    }
    for sample in &summary.changed {
        eprintln!(
            "sample {}: not recorded: its readings changed while it was being fitted; fit it \
             again",
            shown(sample)
        );
    }
    let asked_for_missing =
        !args.samples.is_empty() && skipped.iter().any(|s| args.samples.iter().any(|a| a == s));
    for sample in skipped.iter().filter(|s| args.samples.contains(s)) {
        eprintln!(
            "sample {}: not fitted: it has no conductivity readings (porewise import \
             conductivity)",
            shown(sample)
        );
    }
    Ok(
        if summary.is_complete() && !asked_for_missing && !summary.fitted.is_empty() {
            Outcome::Success
        } else if summary.fitted.is_empty()
            && summary.failed.is_empty()
            && summary.changed.is_empty()
        {
            bail!("no selected sample has conductivity readings: nothing was fitted")
        } else {
            Outcome::Partial
        },
    )
}
