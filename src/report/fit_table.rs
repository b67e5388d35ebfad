//! Fit results as CSV or JSON, in the layout of the design notes ("Fit results").
//!
//! CSV: `sample,model,<parameter columns>,<parameter>_se columns,sse,rmse,r2,aicc,bic,
//! n_points,converged,message`; with several models the parameter columns are the union in
//! the order of the model table, empty where a model has no such parameter. With `auto`, a
//! last column `ranking` lists every ranked model as `model:akaike_weight` (best first) and the
//! skipped ones as `model:skipped`. Not-applicable values are empty cells (JSON null), never NaN.
//! JSON: an array of `{sample, model, parameters: {name: {value, se, ci95, ci95_scale,
//! kink_cm}}, sse, rmse, r2, aicc, bic, n_points, converged, message}` (plus `ranking` and
//! `skipped` with `auto`): `ci95` is the 95 % interval, on the `log` scale for suctions and
//! inverse suctions and the `linear` one otherwise; `kink_cm` the measured suction a
//! breakpoint sits on (its se and interval then come from a one-sided derivative).

use serde_json::{Map, Value, json};

use super::csv_safe::text;
use crate::fit::{AutoFit, FitReport};
use crate::model::retention::ModelKind;

/// One output row: a sample and what fitting it gave.
#[derive(Debug, Clone, PartialEq)]
pub struct FitRow {
    /// Sample name.
    pub sample: String,
    /// Model identifier (the AICc-best one with `auto`, or the one asked for).
    pub model: String,
    /// The fit, when one could be made.
    pub report: Option<FitReport>,
    /// Why there is no fit.
    pub message: Option<String>,
    /// With `auto`: the ranking and skipped models.
    pub auto: Option<AutoFit>,
}

impl FitRow {
    /// True when the row holds a converged fit.
    pub fn is_fitted(&self) -> bool {
        self.report.as_ref().is_some_and(|r| r.converged)
    }

    /// The row's message: the reason there is no fit, or the fit's own notes.
    pub fn message(&self) -> Option<&str> {
        self.message
            .as_deref()
            .or_else(|| self.report.as_ref().and_then(|r| r.message.as_deref()))
    }
}

/// Parameter columns for these rows: the union in the order of [`ModelKind::ALL`], then any
/// other names in order of appearance.
fn parameter_columns(rows: &[FitRow]) -> Vec<String> {
    parameter_union(
        rows.iter().map(|r| r.model.as_str()),
        rows.iter()
            .filter_map(|r| r.report.as_ref())
            .flat_map(|rep| rep.parameters.iter().map(|p| p.name.as_str())),
    )
}

/// The parameter names of these models, as a union in the order of [`ModelKind::ALL`], then
/// any `extra` names not among them, in order of appearance.
pub fn parameter_union<'a>(
    models: impl IntoIterator<Item = &'a str>,
    extra: impl IntoIterator<Item = &'a str>,
) -> Vec<String> {
    let models: Vec<&str> = models.into_iter().collect();
    let mut names: Vec<String> = Vec::new();
    let mut push = |n: &str| {
        if !names.iter().any(|m| m == n) {
            names.push(n.to_string());
        }
    };
    for kind in ModelKind::ALL {
        if models.contains(&kind.id()) {
            for p in kind.params() {
                push(p.name);
            }
        }
    }
    for n in extra {
        push(n);
    }
    names
}

fn num(v: Option<f64>) -> String {
    match v {
        Some(x) if x.is_finite() => super::format_number(x),
        _ => String::new(),
    }
}

fn ranking_text(auto: &AutoFit) -> String {
    let mut parts: Vec<String> = auto
        .ranked
        .iter()
        .map(|r| format!("{}:{:.4}", r.report.model, r.akaike_weight))
        .collect();
    parts.extend(auto.skipped.iter().map(|s| format!("{}:skipped", s.model)));
    parts.join(" ")
}

/// The rows as CSV text (comma-separated, header first); text cells (sample names come from
/// the input file) neutralised against spreadsheet formulas.
///
/// # Errors
/// Only if the CSV writer fails on its in-memory buffer.
pub fn to_csv(rows: &[FitRow]) -> Result<String, csv::Error> {
    let params = parameter_columns(rows);
    let with_ranking = rows.iter().any(|r| r.auto.is_some());
    let mut w = super::csv_safe::writer();
    let mut header: Vec<String> = vec!["sample".into(), "model".into()];
    header.extend(params.iter().cloned());
    header.extend(params.iter().map(|p| format!("{p}_se")));
    for h in [
        "sse",
        "rmse",
        "r2",
        "aicc",
        "bic",
        "n_points",
        "converged",
        "message",
    ] {
        header.push(h.to_string());
    }
    if with_ranking {
        header.push("ranking".into());
    }
    w.write_record(&header)?;
    for row in rows {
        let mut rec: Vec<String> = vec![text(&row.sample), text(&row.model)];
        let est = |name: &str| row.report.as_ref().and_then(|r| r.parameter(name));
        rec.extend(params.iter().map(|p| num(est(p).map(|e| e.value))));
        rec.extend(params.iter().map(|p| num(est(p).and_then(|e| e.se))));
        let r = row.report.as_ref();
        rec.push(num(r.map(|r| r.sse)));
        rec.push(num(r.map(|r| r.rmse)));
        rec.push(num(r.and_then(|r| r.r2)));
        rec.push(num(r.and_then(|r| r.aicc)));
        rec.push(num(r.and_then(|r| r.bic)));
        rec.push(r.map_or(String::new(), |r| r.n_points.to_string()));
        rec.push(row.is_fitted().to_string());
        rec.push(text(row.message().unwrap_or("")));
        if with_ranking {
            rec.push(text(&row.auto.as_ref().map_or(String::new(), ranking_text)));
        }
        w.write_record(&rec)?;
    }
    super::csv_safe::finish(w)
}

fn opt(v: Option<f64>) -> Value {
    v.filter(|x| x.is_finite())
        .map_or(Value::Null, |x| json!(x))
}

/// One row as a JSON object.
fn row_json(row: &FitRow) -> Value {
    let mut params = Map::new();
    let r = row.report.as_ref();
    if let Some(rep) = r {
        for p in &rep.parameters {
            let ci95 = p
                .ci95
                .filter(|c| c.iter().all(|v| v.is_finite()))
                .map_or(Value::Null, |c| json!(c));
            params.insert(
                p.name.clone(),
                json!({
                    "value": opt(Some(p.value)),
                    "se": opt(p.se),
                    "ci95": ci95,
                    "ci95_scale": p.ci95_scale,
                    "kink_cm": opt(p.kink_cm),
                }),
            );
        }
    }
    let mut obj = Map::new();
    obj.insert("sample".into(), json!(row.sample));
    obj.insert("model".into(), json!(row.model));
    obj.insert("parameters".into(), Value::Object(params));
    obj.insert("sse".into(), opt(r.map(|r| r.sse)));
    obj.insert("rmse".into(), opt(r.map(|r| r.rmse)));
    obj.insert("r2".into(), opt(r.and_then(|r| r.r2)));
    obj.insert("aicc".into(), opt(r.and_then(|r| r.aicc)));
    obj.insert("bic".into(), opt(r.and_then(|r| r.bic)));
    obj.insert(
        "n_points".into(),
        r.map_or(Value::Null, |r| json!(r.n_points)),
    );
    obj.insert("converged".into(), json!(row.is_fitted()));
    obj.insert(
        "message".into(),
        row.message().map_or(Value::Null, |m| json!(m)),
    );
    if let Some(auto) = &row.auto {
        let ranking: Vec<Value> = auto
            .ranked
            .iter()
            .map(|x| {
                json!({
                    "model": x.report.model,
                    "aicc": opt(x.report.aicc),
                    "delta_aicc": opt(Some(x.delta_aicc)),
                    "akaike_weight": opt(Some(x.akaike_weight)),
                })
            })
            .collect();
        let skipped: Vec<Value> = auto
            .skipped
            .iter()
            .map(|s| json!({"model": s.model, "reason": s.reason}))
            .collect();
        obj.insert("ranking".into(), Value::Array(ranking));
        obj.insert("skipped".into(), Value::Array(skipped));
    }
    Value::Object(obj)
}

/// The rows as a pretty-printed JSON array.
///
/// # Errors
/// Only if serialisation fails (it does not for these values).
pub fn to_json(rows: &[FitRow]) -> Result<String, serde_json::Error> {
    let array: Vec<Value> = rows.iter().map(row_json).collect();
    let mut text = serde_json::to_string_pretty(&Value::Array(array))?;
    text.push('\n');
    Ok(text)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::fit::{FitOptions, Readings, fit_model};

    fn row(model: ModelKind) -> FitRow {
        let h = [0.0, 10.0, 30.0, 100.0, 330.0, 1000.0, 15000.0];
        let p = [0.05, 0.42, 0.03, 1.6];
        let mut y: Vec<f64> = h
            .iter()
            .map(|&x| ModelKind::VanGenuchten.curve().value(x, &p))
            .collect();
        y[2] += 0.004;
        let r = fit_model(model, &Readings::new(&h, &y), &FitOptions::new()).unwrap();
        FitRow {
            sample: "S1".into(),
            model: model.id().into(),
            report: Some(r),
            message: None,
            auto: None,
        }
    }

    #[test]
    fn union_of_columns_in_table_order() {
        let rows = vec![row(ModelKind::Campbell), row(ModelKind::VanGenuchten)];
        let text = to_csv(&rows).unwrap();
        let header = text.lines().next().unwrap();
        assert!(
            header.starts_with("sample,model,theta_r,theta_s,alpha_per_cm,n,h_e_cm,b,theta_r_se,"),
            "{header}"
        );
        assert!(header.ends_with("sse,rmse,r2,aicc,bic,n_points,converged,message"));
        // Campbell has no theta_r: empty cell, never NaN.
        let campbell = text.lines().nth(1).unwrap();
        assert!(campbell.starts_with("S1,campbell,,"), "{campbell}");
        assert!(!text.contains("NaN"));
    }

    #[test]
    fn json_gives_each_interval_with_its_scale() {
        let rows = vec![row(ModelKind::VanGenuchten)];
        let v: Value = serde_json::from_str(&to_json(&rows).unwrap()).unwrap();
        let alpha = &v[0]["parameters"]["alpha_per_cm"];
        assert_eq!(alpha["ci95_scale"], "log", "{alpha}");
        let (value, lo, hi) = (
            alpha["value"].as_f64().unwrap(),
            alpha["ci95"][0].as_f64().unwrap(),
            alpha["ci95"][1].as_f64().unwrap(),
        );
        assert!(
            lo > 0.0 && ((lo * hi).sqrt() / value - 1.0).abs() < 1e-12,
            "{alpha}"
        );
        assert_eq!(v[0]["parameters"]["n"]["ci95_scale"], "linear");
        assert_eq!(alpha["kink_cm"], Value::Null);
    }

    #[test]
    fn failed_rows_have_empty_numbers_and_json_nulls() {
        let rows = vec![FitRow {
            sample: "S2".into(),
            model: "van-genuchten".into(),
            report: None,
            message: Some("3 readings for 4 free parameters".into()),
            auto: None,
        }];
        let text = to_csv(&rows).unwrap();
        assert!(text.lines().nth(1).unwrap().contains(",,,false,3 readings"));
        let v: Value = serde_json::from_str(&to_json(&rows).unwrap()).unwrap();
        assert_eq!(v[0]["sse"], Value::Null);
        assert_eq!(v[0]["converged"], json!(false));
    }
}
