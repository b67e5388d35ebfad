//! The listing of `porewise advise`: per sample the next suction to measure and what it would
//! do, the samples where it pays most first (a lab order can be written from it), or every
//! candidate of every sample.

use crate::analysis::advise::{AdviceTarget, CampaignAdvice, SampleAdvice, StepEffect};
use crate::model::units::SuctionUnit;
use crate::report::{Cell, Column, Listing};

/// Names of the target's columns: value (if any), half-width now, after.
fn target_columns(target: AdviceTarget) -> [&'static str; 3] {
    match target {
        AdviceTarget::AvailableWater => [
            "available_water_m3_m3",
            "aw_pm_now_m3_m3",
            "aw_pm_after_m3_m3",
        ],
        AdviceTarget::Parameters => ["det_ratio", "param_pm_now_pct", "param_pm_after_pct"],
    }
}

/// The advice as rows, one per sample in ranking order, or with `every_step` one per sample
/// and candidate (the chosen one marked `yes` in `chosen`).
///
/// Columns: `rank,sample,site,top_cm,bottom_cm,model,state,suction_<unit>`, for
/// `available-water` `available_water_m3_m3,aw_pm_now_m3_m3,aw_pm_after_m3_m3`, for
/// `parameters` `det_ratio,param_pm_now_pct,param_pm_after_pct` (the geometric mean of the
/// parameters' relative 95 % half-widths), then `shrink_pct,noise_sd_m3_m3,noise_from,fit`
/// (and `chosen` with `every_step`).
pub fn advice_listing(
    advice: &CampaignAdvice,
    target: AdviceTarget,
    unit: SuctionUnit,
    every_step: bool,
) -> Listing {
    let [value, now, after] = target_columns(target);
    let mut names = vec![
        "rank",
        "sample",
        "site",
        "top_cm",
        "bottom_cm",
        "model",
        "state",
        unit.column_name(),
        value,
        now,
        after,
        "shrink_pct",
        "noise_sd_m3_m3",
        "noise_from",
        "fit",
    ];
    if every_step {
        names.push("chosen");
    }
    let mut l = Listing::new(names.into_iter().map(Column::new).collect());
    for (rank, s) in advice.ranked.iter().enumerate() {
        if every_step {
            for (i, step) in s.advice.steps.iter().enumerate() {
                let mut row = row(rank + 1, s, step, target, unit);
                row.push(Cell::Text((i == s.advice.best).then(|| "yes".to_string())));
                l.push(row);
            }
        } else {
            l.push(row(rank + 1, s, s.advice.best_step(), target, unit));
        }
    }
    l
}

fn row(
    rank: usize,
    s: &SampleAdvice,
    step: &StepEffect,
    target: AdviceTarget,
    unit: SuctionUnit,
) -> Vec<Cell> {
    let a = &s.advice;
    let value = match target {
        AdviceTarget::AvailableWater => a.available_water.into(),
        AdviceTarget::Parameters => step.det_ratio.into(),
    };
    let shrink = (a.now > 0.0).then(|| 100.0 * (a.now - step.after) / a.now);
    vec![
        Cell::Int(rank as i64),
        Cell::text(&s.sample.code),
        Cell::text(&s.sample.layer.site),
        s.sample.layer.top_cm.into(),
        s.sample.layer.bottom_cm.into(),
        Cell::text(&a.model),
        Cell::text(s.state.label()),
        unit.from_cm(step.h_cm).into(),
        value,
        a.now.into(),
        step.after.into(),
        shrink.into(),
        a.noise.sd.into(),
        Cell::text(a.noise.basis.label()),
        s.fit_id.into(),
    ]
}
