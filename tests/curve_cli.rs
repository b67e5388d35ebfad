//! `porewise curve` through the real binary: exit codes, header, values, error messages.
#![allow(
    clippy::unreadable_literal,
    clippy::float_cmp,
    clippy::excessive_precision
)]

use assert_cmd::Command;
use predicates::prelude::*;

/// Carsel & Parrish (1988) loam: theta_r 0.078, theta_s 0.43, alpha 0.036 1/cm, n 1.56,
/// Ks 24.96 cm/day (from memory, high, per soil-reference.md).
const LOAM: &str = "theta_r=0.078,theta_s=0.43,alpha_per_cm=0.036,n=1.56";

fn curve() -> Command {
    let mut cmd = Command::new(env!("CARGO_BIN_EXE_porewise"));
    cmd.arg("curve");
    cmd
}

fn stdout_of(args: &[&str]) -> String {
    let out = curve()
        .args(args)
        .assert()
        .success()
        .get_output()
        .stdout
        .clone();
    String::from_utf8(out).expect("utf-8")
}

fn cell(line: &str, column: usize) -> f64 {
    line.split(',')
        .nth(column)
        .expect("column")
        .parse()
        .expect("number")
}

#[test]
fn default_grid_is_five_per_decade_with_the_design_header() {
    let text = stdout_of(&["--model", "van-genuchten", "--set", LOAM]);
    let lines: Vec<&str> = text.lines().collect();
    assert_eq!(
        lines[0],
        "suction_cm,theta,effective_saturation,capacity_per_cm"
    );
    assert_eq!(lines.len(), 1 + 31, "1 cm to 10^6 cm, five per decade");
    assert_eq!(cell(lines[1], 0), 1.0);
    assert!((cell(lines[31], 0) / 1e6 - 1.0).abs() < 1e-12);
}

#[test]
fn theta_at_100_cm_matches_table_t1() {
    // soil-reference.md table T1, loam at h = 100 cm: 0.2421317847 (computed independently
    // from the Carsel & Parrish 1988 parameters).
    let text = stdout_of(&[
        "--model",
        "van-genuchten",
        "--set",
        LOAM,
        "--suction-cm",
        "100",
    ]);
    let row = text.lines().nth(1).expect("one row");
    assert!((cell(row, 1) / 0.2421317847 - 1.0).abs() < 1e-9, "{row}");
    // Table T2: Se = 0.4662834793; table T3: C(100) = 0.0008094057229 per cm.
    assert!((cell(row, 2) / 0.4662834793 - 1.0).abs() < 1e-9, "{row}");
    assert!((cell(row, 3) / 0.0008094057229 - 1.0).abs() < 1e-9, "{row}");
}

#[test]
fn conductivity_columns_with_ks_match_table_t3() {
    // soil-reference.md table T3, loam: Kr(100) = 0.001359075334, K(100) = 0.03392252035 cm/day.
    let text = stdout_of(&[
        "--model",
        "van-genuchten",
        "--set",
        LOAM,
        "--suction-cm",
        "0,100",
        "--ks-cm-per-day",
        "24.96",
    ]);
    let lines: Vec<&str> = text.lines().collect();
    assert_eq!(
        lines[0],
        "suction_cm,theta,effective_saturation,capacity_per_cm,relative_conductivity,conductivity_cm_per_day,conductivity_model"
    );
    assert_eq!(lines[1], "0,0.43,1,0,1,24.96,mualem-van-genuchten");
    assert!((cell(lines[2], 4) / 0.001359075334 - 1.0).abs() < 1e-9);
    assert!((cell(lines[2], 5) / 0.03392252035 - 1.0).abs() < 1e-9);
}

#[test]
fn kpa_suctions_are_printed_in_cm() {
    let text = stdout_of(&[
        "--model",
        "van-genuchten",
        "--set",
        LOAM,
        "--suction-kpa",
        "33",
    ]);
    let row = text.lines().nth(1).expect("one row");
    // soil-reference.md table T10: 33 kPa = 336.5063503 cm; loam theta(33 kPa) = 0.1644461373
    // (soil-reference.json record theta_at_33kpa, computed independently, Carsel & Parrish 1988).
    assert!((cell(row, 0) / 336.5063503 - 1.0).abs() < 1e-9, "{row}");
    assert!((cell(row, 1) / 0.1644461373 - 1.0).abs() < 1e-9, "{row}");
}

#[test]
fn break_point_capacity_is_an_empty_cell() {
    let text = stdout_of(&[
        "--model",
        "brooks-corey",
        "--set",
        "theta_r=0.02,theta_s=0.437,h_b_cm=7.26,lambda=0.592",
        "--suction-cm",
        "7.26",
    ]);
    assert_eq!(text.lines().nth(1), Some("7.26,0.437,1,"));
}

#[test]
fn unknown_parameter_lists_the_model_names() {
    curve()
        .args([
            "--model",
            "van-genuchten",
            "--set",
            "theta_r=0.05,lambda=0.3",
        ])
        .assert()
        .code(1)
        .stdout("")
        .stderr(predicate::str::contains("no parameter \"lambda\""))
        .stderr(predicate::str::contains(
            "theta_r, theta_s, alpha_per_cm, n",
        ));
}

#[test]
fn missing_parameter_is_named() {
    curve()
        .args([
            "--model",
            "kosugi",
            "--set",
            "theta_r=0.05,theta_s=0.45,sigma=1.5",
        ])
        .assert()
        .code(1)
        .stderr(predicate::str::contains("missing h_m_cm"));
}

#[test]
fn out_of_bounds_and_nan_values_are_refused() {
    curve()
        .args([
            "--model",
            "van-genuchten",
            "--set",
            "theta_r=0.05,theta_s=0.4,alpha_per_cm=0.02,n=0.9",
        ])
        .assert()
        .code(1)
        .stderr(predicate::str::contains("n = 0.9 is outside its bounds"));
    curve()
        .args([
            "--model",
            "van-genuchten",
            "--set",
            "theta_r=NaN,theta_s=0.4,alpha_per_cm=0.02,n=2",
        ])
        .assert()
        .code(1)
        .stderr(predicate::str::contains("not a finite number"));
    curve()
        .args(["--model", "van-genuchten", "--set", "theta_r,theta_s=0.4"])
        .assert()
        .code(1)
        .stderr(predicate::str::contains("expected NAME=VALUE"));
    curve()
        .args([
            "--model",
            "van-genuchten",
            "--set",
            LOAM,
            "--suction-cm",
            "10,nan",
        ])
        .assert()
        .code(1)
        .stderr(predicate::str::contains("suction number 2"));
}

#[test]
fn unknown_model_and_missing_conductivity_model_are_errors() {
    curve()
        .args(["--model", "gardner", "--set", "a=1"])
        .assert()
        .code(1)
        .stderr(predicate::str::contains("expected one of van-genuchten"));
    curve()
        .args([
            "--model",
            "fredlund-xing",
            "--set",
            "theta_s=0.45,a_cm=100,n=2,m=1,h_r_cm=15296",
            "--ks-cm-per-day",
            "10",
        ])
        .assert()
        .code(1)
        .stderr(predicate::str::contains("no closed-form conductivity"));
}

#[test]
fn usage_errors_are_clap_errors_and_help_has_an_example() {
    curve()
        .args([
            "--model",
            "van-genuchten",
            "--set",
            LOAM,
            "--suction-cm",
            "1",
            "--suction-kpa",
            "1",
        ])
        .assert()
        .code(2);
    curve()
        .arg("--help")
        .assert()
        .success()
        .stdout(predicate::str::contains("Example:"))
        .stdout(predicate::str::contains("fredlund-xing"));
}

#[test]
fn effective_saturation_is_printed_with_its_relative_precision() {
    // mpmath 1.3.0, 50 digits (tests/data/high_precision.py): Se = 1.5999999999999958e-19
    // for these invented parameters at 10^6 cm; from theta it used to print 0.
    let text = stdout_of(&[
        "--model",
        "van-genuchten",
        "--set",
        "theta_r=0.05,theta_s=0.4,alpha_per_cm=0.05,n=5",
        "--suction-cm",
        "1e6",
    ]);
    let row = text.lines().nth(1).expect("one row");
    let se = cell(row, 2);
    assert!(
        (se / 1.5999999999999958008e-19 - 1.0).abs() < 1e-13,
        "{row}"
    );
}

#[test]
fn brooks_corey_conductivity_is_burdine_or_mualem_and_says_which() {
    // Invented parameters h_b 7.26 cm, lambda 0.592. At 100 cm Se = (7.26/100)^0.592; Burdine
    // (1953) Kr = Se^(3 + 2/lambda), Mualem (1976) Kr = Se^(L + 2 + 2/lambda) with L = 0.5.
    let bc = "theta_r=0.02,theta_s=0.437,h_b_cm=7.26,lambda=0.592";
    let run = |extra: &[&str]| {
        let mut args = vec![
            "--model",
            "brooks-corey",
            "--set",
            bc,
            "--suction-cm",
            "100",
            "--ks-cm-per-day",
            "504",
        ];
        args.extend_from_slice(extra);
        let text = stdout_of(&args);
        text.lines().nth(1).expect("one row").to_string()
    };
    let se: f64 = (7.26_f64 / 100.0).powf(0.592);
    let burdine = run(&[]);
    assert!(burdine.ends_with(",burdine-brooks-corey"), "{burdine}");
    assert!((cell(&burdine, 4) / se.powf(3.0 + 2.0 / 0.592) - 1.0).abs() < 1e-12);
    let same = run(&["--conductivity", "burdine"]);
    assert_eq!(same, burdine);
    let mualem = run(&["--conductivity", "mualem"]);
    assert!(mualem.ends_with(",mualem-brooks-corey"), "{mualem}");
    assert!((cell(&mualem, 4) / se.powf(2.5 + 2.0 / 0.592) - 1.0).abs() < 1e-12);
    let l1 = run(&["--conductivity", "mualem", "--pore-connectivity", "1"]);
    assert!((cell(&l1, 4) / se.powf(3.0 + 2.0 / 0.592) - 1.0).abs() < 1e-12);
    // Burdine has no L; van Genuchten has no Burdine form here; the form needs Ks.
    curve()
        .args([
            "--model",
            "brooks-corey",
            "--set",
            bc,
            "--ks-cm-per-day",
            "504",
        ])
        .args(["--pore-connectivity", "1"])
        .assert()
        .code(1)
        .stderr(predicate::str::contains("no pore-connectivity exponent"));
    curve()
        .args([
            "--model",
            "van-genuchten",
            "--set",
            LOAM,
            "--ks-cm-per-day",
            "24.96",
        ])
        .args(["--conductivity", "burdine"])
        .assert()
        .code(1)
        .stderr(predicate::str::contains(
            "van-genuchten has no burdine conductivity here; it pairs with Mualem-van Genuchten",
        ));
    curve()
        .args([
            "--model",
            "brooks-corey",
            "--set",
            bc,
            "--conductivity",
            "mualem",
        ])
        .assert()
        .code(2);
}

#[test]
fn van_genuchten_with_free_m_has_mualem_conductivity() {
    // Kr(100 cm) = 0.0085246891413815262158 for theta_r 0.05, theta_s 0.4, alpha 0.02 1/cm,
    // n 1.5, m 0.3, L 0.5: mpmath 1.3.0, 50 digits, by quadrature of Mualem's integral
    // (tests/data/high_precision.py).
    let text = stdout_of(&[
        "--model",
        "van-genuchten-free-m",
        "--set",
        "theta_r=0.05,theta_s=0.4,alpha_per_cm=0.02,n=1.5,m=0.3",
        "--suction-cm",
        "100",
        "--ks-cm-per-day",
        "10",
    ]);
    let row = text.lines().nth(1).expect("one row");
    assert!(row.ends_with(",mualem-van-genuchten-free-m"), "{row}");
    assert!(
        (cell(row, 4) / 0.0085246891413815262158 - 1.0).abs() < 1e-12,
        "{row}"
    );
    assert!(
        (cell(row, 5) / 0.085246891413815262158 - 1.0).abs() < 1e-12,
        "{row}"
    );
}
