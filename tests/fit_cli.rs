//! `porewise fit --input`: exit codes, CSV columns, JSON, placed errors (fixtures in tests/data).

use assert_cmd::Command;
use predicates::prelude::*;

fn data(path: &str) -> String {
    format!("{}/tests/data/{path}", env!("CARGO_MANIFEST_DIR"))
}

fn porewise() -> Command {
    Command::cargo_bin("porewise").expect("binary")
}

#[test]
fn every_sample_fitted_exits_0_with_the_design_columns() {
    let out = porewise()
        .args(["fit", "--input", &data("valid/pairs_two_samples.csv")])
        .assert()
        .code(0)
        .get_output()
        .stdout
        .clone();
    let text = String::from_utf8(out).expect("utf8");
    let mut lines = text.lines();
    assert_eq!(
        lines.next(),
        Some(
            "sample,model,theta_r,theta_s,alpha_per_cm,n,theta_r_se,theta_s_se,alpha_per_cm_se,n_se,sse,rmse,r2,aicc,bic,n_points,converged,message"
        )
    );
    let rows: Vec<&str> = lines.collect();
    assert_eq!(rows.len(), 2);
    assert!(
        rows[0].starts_with("core-01,van-genuchten,0.0"),
        "{}",
        rows[0]
    );
    assert!(rows.iter().all(|r| r.contains(",9,true,")), "{rows:?}");
    assert!(!text.contains("NaN"));
}

#[test]
fn a_sample_that_cannot_be_fitted_exits_3_and_is_named() {
    porewise()
        .args(["fit", "--input", &data("valid/pairs_one_too_short.csv")])
        .assert()
        .code(3)
        .stdout(predicate::str::contains("short,van-genuchten,,"))
        .stderr(predicate::str::contains(
            "sample short: not fitted: 3 readings",
        ));
}

#[test]
fn bad_file_exits_1_naming_file_line_column() {
    let file = data("invalid/pairs_bad_theta.csv");
    porewise()
        .args(["fit", "--input", &file])
        .assert()
        .code(1)
        .stderr(predicate::str::contains(format!(
            "{file}:4:theta: found \"zero point three\", expected a number"
        )))
        .stdout(predicate::str::is_empty());
}

#[test]
fn unknown_model_or_parameter_exits_1() {
    let file = data("valid/pairs_two_samples.csv");
    porewise()
        .args(["fit", "--input", &file, "--model", "spline"])
        .assert()
        .code(1)
        .stderr(predicate::str::contains("unknown model \"spline\""));
    porewise()
        .args(["fit", "--input", &file, "--fix", "lambda=0.5"])
        .assert()
        .code(1)
        .stderr(predicate::str::contains("lambda"));
}

#[test]
fn json_output_file_parses_and_fixed_values_hold() {
    let dir = tempfile::tempdir().expect("tempdir");
    let out = dir.path().join("fits.json");
    porewise()
        .args([
            "fit",
            "--input",
            &data("valid/pairs_semicolon_kpa_pct.csv"),
            "--fix",
            "theta_r=0",
        ])
        .arg("--output")
        .arg(&out)
        .assert()
        .code(0)
        .stdout(predicate::str::is_empty());
    let v: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(&out).expect("written")).expect("json");
    let row = &v[0];
    assert_eq!(row["sample"], "core-03");
    assert_eq!(row["parameters"]["theta_r"]["value"], 0.0);
    assert!(row["parameters"]["theta_r"]["se"].is_null());
    assert!(
        row["parameters"]["n"]["se"]
            .as_f64()
            .is_some_and(|s| s > 0.0)
    );
    assert_eq!(row["converged"], true);
    // Nothing else (no temporary file) is left in the directory.
    assert_eq!(std::fs::read_dir(dir.path()).expect("dir").count(), 1);
}

#[test]
fn auto_ranks_models_in_a_last_column() {
    porewise()
        .args([
            "fit",
            "--input",
            &data("valid/pairs_two_samples.csv"),
            "--model",
            "auto",
        ])
        .assert()
        .code(0)
        .stdout(predicate::str::contains(",message,ranking"))
        .stdout(predicate::str::contains(",true,,van-genuchten:0.9"));
}

#[test]
fn help_shows_an_example() {
    porewise()
        .args(["fit", "--help"])
        .assert()
        .code(0)
        .stdout(predicate::str::contains("porewise fit --input lab.csv"));
}
