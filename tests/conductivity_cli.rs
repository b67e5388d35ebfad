//! `porewise import conductivity` and `porewise list DB conductivity` through the real binary:
//! good files in every unit, each class of bad input at its exact `FILE:LINE:COLUMN`, nothing
//! written on a refusal, re-import refused.

mod common;

use common::{Scratch, stderr, stdout};

/// Import `file` (after the valid evaporation file when `after_valid`), expect exit 1 with
/// each `expected` text and `problems` problems, and no conductivity reading or Ks written.
fn rejects(file: &str, after_valid: bool, expected: &[&str], problems: usize) {
    let s = Scratch::new();
    if after_valid {
        s.import_ok("conductivity", &["valid/conductivity_evaporation.csv"]);
    }
    let before = (
        s.count("conductivity_reading"),
        s.count("sample WHERE ks_cm_per_day IS NOT NULL"),
    );
    s.refused("conductivity", &[file], &[], expected, problems);
    let after = (
        s.count("conductivity_reading"),
        s.count("sample WHERE ks_cm_per_day IS NOT NULL"),
    );
    assert_eq!(before, after, "a refused import wrote conductivity data");
}

#[test]
fn bad_values_are_placed_at_file_line_column() {
    rejects(
        "invalid/conductivity_bad_values.csv",
        false,
        &[
            "invalid/conductivity_bad_values.csv:3:conductivity_mm_per_h: found \"0\", expected \
             a conductivity greater than 0 and at most 4167000 mm/h (1e7 cm/day)",
            "invalid/conductivity_bad_values.csv:4:conductivity_mm_per_h: found \"-0.002\", \
             expected a conductivity greater than 0",
            "invalid/conductivity_bad_values.csv:5:conductivity_mm_per_h: found \"NaN\", \
             expected a finite number",
            "invalid/conductivity_bad_values.csv:6:conductivity_mm_per_h: found \"inf\", \
             expected a finite number",
            "invalid/conductivity_bad_values.csv:7:suction_hpa: found \"-4\", expected a \
             suction of 0 or more",
            "invalid/conductivity_bad_values.csv:8:ks_mm_per_h: found \"14\", but \
             invalid/conductivity_bad_values.csv:2 gives sample \"K1\" a Ks of 28.8 cm/day; \
             expected one Ks per sample",
        ],
        6,
    );
}

#[test]
fn a_conductivity_column_needs_its_unit() {
    rejects(
        "invalid/conductivity_no_unit.csv",
        false,
        &[
            "invalid/conductivity_no_unit.csv:1:conductivity_<unit>: found no conductivity \
             column in the header, expected one of conductivity_cm_per_day, \
             conductivity_cm_per_h, conductivity_mm_per_h, conductivity_m_per_s",
        ],
        1,
    );
    rejects(
        "invalid/conductivity_unknown_unit.csv",
        false,
        &[
            "invalid/conductivity_unknown_unit.csv:1:conductivity_in_per_h: found the unit \
             \"in_per_h\" in column \"conductivity_in_per_h\"",
        ],
        1,
    );
}

#[test]
fn one_place_of_measurement_per_file() {
    rejects(
        "invalid/conductivity_suction_and_theta.csv",
        false,
        &[
            "invalid/conductivity_suction_and_theta.csv:1:theta: found a second column \
             \"theta\" saying where K was measured besides \"suction_cm\"",
        ],
        1,
    );
    rejects(
        "invalid/conductivity_gravimetric.csv",
        false,
        &[
            "invalid/conductivity_gravimetric.csv:1:water_g_per_g: found the gravimetric \
             column \"water_g_per_g\", expected a volumetric water content (theta or theta_pct)",
        ],
        1,
    );
}

#[test]
fn duplicates_in_the_file_and_against_the_campaign() {
    rejects(
        "invalid/conductivity_duplicate.csv",
        false,
        &[
            "invalid/conductivity_duplicate.csv:4:suction_kpa: found sample \"K1\" at \
             101.972 cm again (first at invalid/conductivity_duplicate.csv:2)",
        ],
        1,
    );
    rejects(
        "invalid/conductivity_repeats_campaign.csv",
        true,
        &[
            "invalid/conductivity_repeats_campaign.csv:2:suction_cm: found sample \"LV-K1\" at \
             60 cm, which the campaign already holds a conductivity for (from \
             valid/conductivity_evaporation.csv:3)",
            "invalid/conductivity_repeats_campaign.csv:4:ks_cm_per_day: found a Ks of 13 \
             cm/day for sample \"LV-K2\", but the campaign holds 12 cm/day",
        ],
        2,
    );
    rejects(
        "invalid/conductivity_sample_two_layers.csv",
        false,
        &[
            "invalid/conductivity_sample_two_layers.csv:3:sample: found sample \"K1\" under \
             layer LV:20-40, but invalid/conductivity_sample_two_layers.csv:2 puts it under \
             LV:0-20",
        ],
        1,
    );
}

#[test]
fn good_files_import_in_every_unit_and_list_back() {
    let s = Scratch::new();
    let out = s
        .import(
            "conductivity",
            &[
                "valid/conductivity_evaporation.csv",
                "valid/conductivity_theta_m_per_s.csv",
            ],
            &[],
        )
        .success();
    assert_eq!(
        stdout(&out).trim(),
        "added 1 site, 2 layers, 2 samples, 8 conductivity readings, 2 Ks values from 2 files"
    );
    assert_eq!(s.count("conductivity_reading"), 8);
    assert_eq!(
        s.count("import_batch WHERE kind = 'conductivity'"),
        2,
        "one batch per file, of the conductivity kind"
    );
    let csv = s.list(&["conductivity", "--format", "csv"]);
    let lines: Vec<&str> = csv.lines().collect();
    assert_eq!(
        lines[0],
        "reading,sample,site,top_cm,bottom_cm,suction_cm,theta,conductivity_cm_per_day,\
         ks_cm_per_day,layer_ks_cm_per_day,method,measured_on,notes,source,uid"
    );
    assert!(
        lines[1].starts_with(
            "1,LV-K1,LV,0,20,25,,3.1,41.5,,evaporation,2026-05-12,,\
             valid/conductivity_evaporation.csv:2,"
        ),
        "{}",
        lines[1]
    );
    // 2.1e-7 m/s = 2.1e-7 x 100 cm x 86 400 s/day = 1.8144 cm/day; listed in m/s it reads
    // back as written.
    assert!(csv.contains(",0.385,1.8144,41.5,"), "{csv}");
    let in_m_per_s = s.list(&[
        "conductivity",
        "--sample",
        "LV-K1",
        "--k-units",
        "m/s",
        "--format",
        "csv",
    ]);
    assert!(in_m_per_s.contains(",0.385,2.1e-7,"), "{in_m_per_s}");
    assert!(!in_m_per_s.contains("LV-K2"));
    // Re-import of the same content is refused and writes nothing.
    let again = s
        .import("conductivity", &["valid/conductivity_evaporation.csv"], &[])
        .code(1);
    assert!(
        stderr(&again).contains("this content was already imported"),
        "{}",
        stderr(&again)
    );
    assert_eq!(s.count("conductivity_reading"), 8);
}

#[test]
fn a_dry_run_writes_nothing() {
    let s = Scratch::new();
    let out = s
        .import(
            "conductivity",
            &["valid/conductivity_evaporation.csv"],
            &["--dry-run"],
        )
        .success();
    assert!(stdout(&out).contains("dry run: 1 file valid; would add"));
    assert_eq!(s.count("conductivity_reading"), 0);
    assert_eq!(s.count("sample"), 0);
}
