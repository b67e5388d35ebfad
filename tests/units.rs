//! Unit conversions against table T10 of the project's reference notes (copied into
//! `tests/data/reference/soil_reference_tables.json`): 1 cm of water = 98.0665 Pa, the
//! conventional water density with standard gravity (CGPM 1901); pF = log10(h / cm).
#![allow(clippy::unreadable_literal)]

use porewise::model::units::{CM_PER_BAR, CM_PER_HPA, CM_PER_KPA, SuctionUnit};
use serde_json::Value;

const REFERENCE: &str = include_str!("data/reference/soil_reference_tables.json");

/// What our code gives for each T10 quantity.
fn ours(quantity: &str) -> Option<f64> {
    let kpa = SuctionUnit::Kpa;
    let pf = SuctionUnit::Pf;
    Some(match quantity {
        "cm_per_kpa" => CM_PER_KPA,
        "kpa_per_cm" => kpa.from_cm(1.0),
        "cm_per_hpa" => CM_PER_HPA,
        "cm_per_bar" => CM_PER_BAR,
        "cm_at_10_kpa" => kpa.to_cm(10.0),
        "cm_at_33_kpa" => kpa.to_cm(33.0),
        "cm_at_1500_kpa" => kpa.to_cm(1500.0),
        "pF_at_10_kpa" => pf.from_cm(kpa.to_cm(10.0)),
        "pF_at_33_kpa" => pf.from_cm(kpa.to_cm(33.0)),
        "pF_at_1500_kpa" => pf.from_cm(kpa.to_cm(1500.0)),
        "pF_at_1e6_kpa" => pf.from_cm(kpa.to_cm(1e6)),
        "kpa_at_pF_2" => kpa.from_cm(pf.to_cm(2.0)),
        "kpa_at_pF_2_5" => kpa.from_cm(pf.to_cm(2.5)),
        "kpa_at_pF_4_2" => kpa.from_cm(pf.to_cm(4.2)),
        "kpa_at_330_cm" => kpa.from_cm(330.0),
        "kpa_at_15000_cm" => kpa.from_cm(15000.0),
        _ => return None,
    })
}

#[test]
fn conversions_match_table_t10() {
    let reference: Value = serde_json::from_str(REFERENCE).expect("reference JSON parses");
    let mut checked = 0;
    for record in reference["computed"].as_array().expect("records") {
        if record["model"] != "unit_conversion" {
            continue;
        }
        let quantity = record["quantity"].as_str().expect("quantity");
        let expected = record["value"].as_f64().expect("value");
        let actual =
            ours(quantity).unwrap_or_else(|| panic!("T10 quantity {quantity} not checked"));
        // Printed to 10 significant digits.
        let rel = (actual - expected).abs() / expected.abs();
        assert!(rel < 1e-9, "{quantity}: ours {actual}, T10 {expected}");
        checked += 1;
    }
    assert_eq!(checked, 16, "every row of T10");
}
