//! The `init`, `import` and `list` commands through the real binary: every class of bad input
//! with its exact `FILE:LINE:COLUMN`, atomicity, re-import refusal, dry runs, units, formats.

mod common;

use std::fmt::Write as _;

use common::{Scratch, porewise, stderr, stdout};

/// Import `file` (after `setup`), expect exit 1 with each `expected` text and `problems`
/// problems on stderr, and no row count changed.
fn rejects(kind: &str, file: &str, setup: &[(&str, &str)], expected: &[&str], problems: usize) {
    let s = Scratch::new();
    for (k, f) in setup {
        s.import_ok(k, &[f]);
    }
    s.refused(kind, &[file], &[], expected, problems);
}

/// One test per class of bad input: name, kind, fixture, expected diagnostics, problem count.
macro_rules! bad_input {
    ($($name:ident: $kind:literal $file:literal $(after $setup:literal)? => [$($e:literal),+ $(,)?] $n:literal;)+) => {$(
        #[test]
        fn $name() {
            let setup: &[(&str, &str)] = &[$(("lab", $setup))?];
            rejects($kind, $file, setup, &[$($e),+], $n);
        }
    )+};
}

bad_input! {
    missing_required_column: "lab" "invalid/lab_missing_column.csv" => [
        "invalid/lab_missing_column.csv:1:sample: found no column \"sample\" in the header, \
         expected the columns site,top_cm,bottom_cm,sample,method,suction_<unit>|pf,",
    ] 1;
    two_suction_columns: "lab" "invalid/lab_two_suctions.csv" => [
        "invalid/lab_two_suctions.csv:1:suction_kpa: found a second suction column \
         \"suction_kpa\" besides \"suction_cm\", expected exactly one",
    ] 1;
    two_water_columns: "lab" "invalid/lab_two_water.csv" => [
        "invalid/lab_two_water.csv:1:theta_pct: found a second water-content column \
         \"theta_pct\" besides \"theta\", expected exactly one",
    ] 1;
    unknown_unit_suffix: "lab" "invalid/lab_unknown_unit.csv" => [
        "invalid/lab_unknown_unit.csv:1:suction_psi: found the unit \"psi\" in column \
         \"suction_psi\", expected one of suction_cm, suction_hpa, suction_kpa, suction_mpa, \
         suction_bar, pf",
    ] 1;
    number_that_does_not_parse: "lab" "invalid/lab_bad_number.csv" => [
        "invalid/lab_bad_number.csv:3:theta: found \"0.3x\", expected a number",
    ] 1;
    nan_and_infinity: "lab" "invalid/lab_nan.csv" => [
        "invalid/lab_nan.csv:2:suction_kpa: found \"NaN\", expected a finite number",
        "invalid/lab_nan.csv:3:theta: found \"inf\", expected a finite number",
    ] 2;
    theta_above_one: "lab" "invalid/lab_theta_range.csv" => [
        "invalid/lab_theta_range.csv:3:theta: found \"1.2\", expected a volumetric water \
         content from 0 to 1 m3/m3",
    ] 1;
    theta_percent_above_hundred: "lab" "invalid/lab_theta_pct_range.csv" => [
        "invalid/lab_theta_pct_range.csv:4:theta_pct: found \"104\", expected a volumetric \
         water content from 0 to 100 %",
    ] 1;
    negative_suction: "lab" "invalid/lab_negative_suction.csv" => [
        "invalid/lab_negative_suction.csv:4:suction_hpa: found \"-5\", expected a suction of \
         0 or more",
    ] 1;
    bottom_above_top: "lab" "invalid/lab_bottom_above_top.csv" => [
        "invalid/lab_bottom_above_top.csv:2:bottom_cm: found \"10\", expected a bottom deeper \
         than top_cm 30",
    ] 1;
    sample_under_two_layers: "lab" "invalid/lab_sample_two_layers.csv" => [
        "invalid/lab_sample_two_layers.csv:5:sample: found sample \"A1\" under layer \
         LV:20-40, but invalid/lab_sample_two_layers.csv:2 puts it under LV:0-20",
    ] 1;
    same_sample_and_suction_twice: "lab" "invalid/lab_duplicate_suction.csv" => [
        "invalid/lab_duplicate_suction.csv:4:suction_kpa: found sample \"A1\" at 33 kPa \
         (336.506 cm) again (first at invalid/lab_duplicate_suction.csv:2)",
    ] 1;
    empty_file: "lab" "invalid/empty.csv" => [
        "invalid/empty.csv:1:-: the file is empty, expected a header row",
    ] 1;
    header_without_rows: "lab" "invalid/header_only.csv" => [
        "invalid/header_only.csv:1:-: found a header row and no data rows",
    ] 1;
    latitude_out_of_range: "sites" "invalid/sites_latitude.csv" => [
        "invalid/sites_latitude.csv:3:latitude: found \"91.0\", expected a latitude from -90 \
         to 90 degrees",
    ] 1;
    longitude_out_of_range: "sites" "invalid/sites_longitude.csv" => [
        "invalid/sites_longitude.csv:2:longitude: found \"-181\", expected a longitude from \
         -180 to 180 degrees",
    ] 1;
    texture_not_summing_to_100: "layers" "invalid/layers_texture.csv" => [
        "invalid/layers_texture.csv:3:clay_pct: found sand + silt + clay = 60 + 30 + 20 = \
         110 %, expected 100 +- 2 %",
    ] 1;
    bulk_density_out_of_range: "layers" "invalid/layers_bulk_density.csv" => [
        "invalid/layers_bulk_density.csv:2:bulk_density_g_cm3: found \"2.9\", expected a dry \
         bulk density from 0.05 to 2.65 g/cm3",
        "invalid/layers_bulk_density.csv:3:bulk_density_g_cm3: found \"0.03\"",
    ] 2;
    gravimetric_without_bulk_density: "lab" "invalid/lab_gravimetric_no_bd.csv" => [
        "invalid/lab_gravimetric_no_bd.csv:2:water_g_per_g: found 0.31 g/g for sample \"G1\" \
         but no bulk density",
        "invalid/lab_gravimetric_no_bd.csv:3:water_g_per_g: found 0.25 g/g",
    ] 2;
    wrong_number_of_fields: "lab" "invalid/lab_wrong_fields.csv" => [
        "invalid/lab_wrong_fields.csv:3:-: found 5 fields, expected 7 (one per header column)",
    ] 1;
    sample_under_another_layer_in_the_campaign: "lab" "invalid/lab_conflicts_campaign.csv"
        after "valid/lab_kpa.csv" => [
        "invalid/lab_conflicts_campaign.csv:2:sample: found sample \"LV-A1\" under layer \
         LV:20-40, but the campaign already holds it under LV:0-20",
    ] 1;
    suction_already_in_the_campaign: "lab" "invalid/lab_repeats_campaign.csv"
        after "valid/lab_kpa.csv" => [
        "invalid/lab_repeats_campaign.csv:3:suction_hpa: found sample \"LV-A1\" at 330 hPa \
         (336.506 cm), which the campaign already holds (from valid/lab_kpa.csv:5)",
    ] 1;
}

#[test]
fn an_error_on_the_last_line_of_the_last_file_writes_nothing() {
    let s = Scratch::new();
    let before = s.counts();
    let assert = s
        .import(
            "lab",
            &["valid/lab_kpa.csv", "invalid/lab_last_line_bad.csv"],
            &[],
        )
        .code(1);
    let err = stderr(&assert);
    assert!(
        err.contains("invalid/lab_last_line_bad.csv:5:theta: found \"1.27\""),
        "{err}"
    );
    assert!(
        err.contains("1 problem found; nothing was written"),
        "{err}"
    );
    assert_eq!(s.counts(), before);
    assert_eq!(s.count("reading"), 0);
    // The good file alone then goes in, so the refusal was about the bad line only.
    s.import_ok("lab", &["valid/lab_kpa.csv"]);
    assert_eq!(s.count("reading"), 9);
}

#[test]
fn problems_are_collected_across_files() {
    let s = Scratch::new();
    let assert = s
        .import(
            "lab",
            &[
                "invalid/lab_bad_number.csv",
                "invalid/lab_sample_two_layers.csv",
            ],
            &[],
        )
        .code(1);
    let err = stderr(&assert);
    assert!(err.contains("invalid/lab_bad_number.csv:3:theta:"), "{err}");
    assert!(
        err.contains("invalid/lab_sample_two_layers.csv:5:sample:"),
        "{err}"
    );
    assert!(err.contains("2 problems found"), "{err}");
}

#[test]
fn at_most_fifty_problems_are_listed_but_all_are_counted() {
    let s = Scratch::new();
    let mut text = String::from("site,top_cm,bottom_cm,sample,method,suction_kpa,theta\n");
    for i in 0..60 {
        writeln!(text, "LV,0,20,S{i},sandbox,{i},2.5").expect("write");
    }
    let file = s.write("many.csv", &text);
    let assert = s.import("lab", &[&file], &[]).code(1);
    let err = stderr(&assert);
    let listed = err.lines().filter(|l| l.contains("many.csv:")).count();
    assert_eq!(listed, 50, "{err}");
    assert!(
        err.contains(&format!("{file}:2:theta: found \"2.5\"")),
        "{err}"
    );
    assert!(err.contains("... and 10 more problems not listed"), "{err}");
    assert!(
        err.contains("60 problems found; nothing was written"),
        "{err}"
    );
    assert_eq!(s.count("reading"), 0);
}

#[test]
fn a_whole_campaign_imports_in_canonical_units() {
    let s = Scratch::new();
    let out = stdout(&s.import("sites", &["valid/sites.csv"], &[]).success());
    assert_eq!(
        out.trim(),
        "added 3 sites, 0 layers, 0 samples, 0 readings from 1 file"
    );
    let out = stdout(&s.import("layers", &["valid/layers.csv"], &[]).success());
    assert_eq!(
        out.trim(),
        "added 0 sites, 4 layers, 0 samples, 0 readings from 1 file"
    );
    let out = stdout(
        &s.import(
            "lab",
            &[
                "valid/lab_kpa.csv",
                "valid/lab_semicolon_bom.csv",
                "valid/lab_gravimetric.csv",
            ],
            &[],
        )
        .success(),
    );
    assert_eq!(
        out.trim(),
        "added 0 sites, 0 layers, 5 samples, 17 readings from 3 files"
    );
    let conn = s.connect();
    let reading = |sample: &str, order: i64| -> (f64, f64, String, Option<i64>) {
        conn.query_row(
            "SELECT r.h_cm, r.theta, r.branch, r.source_line FROM reading r
             JOIN sample m ON r.sample_id = m.id WHERE m.code = ?1 ORDER BY r.h_cm LIMIT 1 OFFSET ?2",
            rusqlite::params![sample, order],
            |r| Ok((r.get(0)?, r.get(1)?, r.get(2)?, r.get(3)?)),
        )
        .expect("reading")
    };
    // Semicolons, a byte-order mark and decimal commas: 330 hPa, 33,05 % -> cm, m3/m3.
    let (h, theta, _, line) = reading("TR-A1", 2);
    assert!((h - 336.506_350_3).abs() < 1e-6, "{h}");
    assert!((theta - 0.3305).abs() < 1e-12, "{theta}");
    assert_eq!(line, Some(4));
    // Gravimetric water with the layer's bulk density (1.21 g/cm3, layers file) ...
    let (h, theta, branch, _) = reading("BS-A1", 0);
    assert!((h - 10.0).abs() < 1e-9, "pF 1 is 10 cm, got {h}");
    assert!((theta - 0.38 * 1.21).abs() < 1e-12, "{theta}");
    assert_eq!(branch, "drying");
    // ... and with the sample's own (1.25 g/cm3, given on another row of the sample).
    let (_, theta, branch, _) = reading("BS-A2", 1);
    assert!((theta - 0.15 * 1.25).abs() < 1e-12, "{theta}");
    assert_eq!(branch, "wetting");
    // Provenance: every reading points at its import batch; a blank line still counts.
    let (file, line): (String, i64) = conn
        .query_row(
            "SELECT b.file_name, r.source_line FROM reading r JOIN import_batch b
             ON r.batch_id = b.id JOIN sample m ON r.sample_id = m.id
             WHERE m.code = 'LV-B1' ORDER BY r.h_cm LIMIT 1",
            [],
            |r| Ok((r.get(0)?, r.get(1)?)),
        )
        .expect("provenance");
    assert_eq!((file.as_str(), line), ("valid/lab_kpa.csv", 9));
    let sha: String = conn
        .query_row(
            "SELECT sha256 FROM import_batch WHERE file_name = 'valid/lab_kpa.csv'",
            [],
            |r| r.get(0),
        )
        .expect("sha");
    assert_eq!(sha.len(), 64);
    assert!(sha.chars().all(|c| c.is_ascii_hexdigit()));
    // The sample got the bulk density its first row gave; the file's notes stayed with the reading.
    let (bd, notes): (f64, String) = conn
        .query_row(
            "SELECT m.bulk_density_g_cm3, r.notes FROM sample m JOIN reading r ON r.sample_id = m.id
             WHERE m.code = 'LV-A1' AND r.notes IS NOT NULL",
            [],
            |r| Ok((r.get(0)?, r.get(1)?)),
        )
        .expect("sample");
    assert!((bd - 1.44).abs() < 1e-12);
    assert_eq!(notes, "dry, cracked");
}

#[test]
fn a_lab_file_creates_the_sites_and_layers_it_names_and_a_sites_file_fills_them_in() {
    let s = Scratch::new();
    s.import_ok("lab", &["valid/lab_kpa.csv"]);
    assert_eq!(
        (s.count("site"), s.count("layer"), s.count("sample")),
        (1, 2, 2)
    );
    let name: Option<String> = s
        .connect()
        .query_row("SELECT name FROM site WHERE code = 'LV'", [], |r| r.get(0))
        .expect("site");
    assert_eq!(name, None);
    let out = stdout(&s.import("sites", &["valid/sites.csv"], &[]).success());
    assert_eq!(
        out.trim(),
        "added 2 sites, 0 layers, 0 samples, 0 readings from 1 file; updated 1 site"
    );
    let (name, lat): (String, f64) = s
        .connect()
        .query_row(
            "SELECT name, latitude FROM site WHERE code = 'LV'",
            [],
            |r| Ok((r.get(0)?, r.get(1)?)),
        )
        .expect("site");
    assert_eq!(name, "Sandy levee");
    assert!((lat - 46.2051).abs() < 1e-12);
    assert_eq!(s.count("site"), 3);
}

#[test]
fn a_later_file_adds_readings_to_a_stored_sample() {
    let s = Scratch::new();
    s.import_ok("lab", &["valid/lab_kpa.csv"]);
    let more = s.write(
        "more.csv",
        "site,top_cm,bottom_cm,sample,method,suction_kpa,theta,bulk_density_g_cm3\n\
         LV,0,20,LV-A1,pressure plate,300,0.055,1.44\n\
         LV,20,40,LV-B1,pressure plate,100,0.071,1.5\n",
    );
    let out = stdout(&s.import("lab", &[&more], &[]).success());
    assert_eq!(
        out.trim(),
        "added 0 sites, 0 layers, 0 samples, 2 readings from 1 file; updated 1 sample"
    );
    assert_eq!((s.count("sample"), s.count("reading")), (2, 11));
    let bd: f64 = s
        .connect()
        .query_row(
            "SELECT bulk_density_g_cm3 FROM sample WHERE code = 'LV-B1'",
            [],
            |r| r.get(0),
        )
        .expect("bulk density recorded");
    assert!((bd - 1.5).abs() < 1e-12);
    // A bulk density that contradicts the stored one is refused.
    let contradicting = s.write(
        "contradicting.csv",
        "site,top_cm,bottom_cm,sample,method,suction_kpa,theta,bulk_density_g_cm3\n\
         LV,0,20,LV-A1,pressure plate,700,0.05,1.3\n",
    );
    let err = stderr(&s.import("lab", &[&contradicting], &[]).code(1));
    assert!(
        err.contains(&format!(
            "{contradicting}:2:bulk_density_g_cm3: found 1.3, but the campaign holds a bulk \
             density of 1.44 g/cm3 for sample \"LV-A1\""
        )),
        "{err}"
    );
}

#[test]
fn a_file_imported_before_is_refused_with_the_date_unless_forced() {
    let s = Scratch::new();
    s.import_ok("sites", &["valid/sites.csv"]);
    let before = s.counts();
    let assert = s.import("sites", &["valid/sites.csv"], &[]).code(1);
    let err = stderr(&assert);
    let today = chrono::Utc::now().format("%Y-%m-%d").to_string();
    assert!(
        err.contains(&format!(
            "valid/sites.csv: this content was already imported on {today}"
        )),
        "{err}"
    );
    assert!(err.contains("use --force"), "{err}");
    assert_eq!(s.counts(), before);
    // The same content under another name is the same file.
    let copy = s.write(
        "copy.csv",
        &std::fs::read_to_string(common::data_dir().join("valid/sites.csv")).expect("read"),
    );
    s.import("sites", &[&copy], &[]).code(1);
    // Forced, it goes in as a second batch and changes nothing else.
    let out = stdout(
        &s.import("sites", &["valid/sites.csv"], &["--force"])
            .success(),
    );
    assert!(out.contains("added 0 sites"), "{out}");
    assert_eq!(s.count("import_batch"), 2);
    assert_eq!(s.count("site"), 3);
    let forced: i64 = s
        .connect()
        .query_row("SELECT forced FROM import_batch WHERE id = 2", [], |r| {
            r.get(0)
        })
        .expect("batch");
    assert_eq!(forced, 1);
}

#[test]
fn forcing_a_lab_file_again_still_refuses_its_repeated_suctions() {
    let s = Scratch::new();
    s.import_ok("lab", &["valid/lab_kpa.csv"]);
    let before = s.counts();
    let assert = s
        .import("lab", &["valid/lab_kpa.csv"], &["--force"])
        .code(1);
    let err = stderr(&assert);
    assert!(
        err.contains(
            "valid/lab_kpa.csv:2:suction_kpa: found sample \"LV-A1\" at 0 kPa (0 cm), which \
             the campaign already holds (from valid/lab_kpa.csv:2)"
        ),
        "{err}"
    );
    assert!(err.contains("9 problems found"), "{err}");
    assert_eq!(s.counts(), before);
}

#[test]
fn a_dry_run_validates_and_counts_but_writes_nothing() {
    let s = Scratch::new();
    let before = s.counts();
    let out = stdout(
        &s.import("lab", &["valid/lab_kpa.csv"], &["--dry-run"])
            .success(),
    );
    assert_eq!(
        out.trim(),
        "dry run: 1 file valid; would add 1 site, 2 layers, 2 samples, 9 readings; nothing was written"
    );
    assert_eq!(s.counts(), before);
    // Not recorded either: the real import is not refused as a repeat.
    s.import_ok("lab", &["valid/lab_kpa.csv"]);
    assert_eq!(s.count("reading"), 9);
    // A dry run of bad input reports like a real one.
    let assert = s
        .import("lab", &["invalid/lab_theta_range.csv"], &["--dry-run"])
        .code(1);
    assert!(stderr(&assert).contains("invalid/lab_theta_range.csv:3:theta:"));
    // And a dry run of a file imported before reports the refusal.
    s.import("lab", &["valid/lab_kpa.csv"], &["--dry-run"])
        .code(1);
}

/// Reference conversions (see tests/data/reference/unit-conversions.csv: table T10 of the
/// project's reference notes, from 1 cm H2O = 98.0665 Pa, standard gravity, 3rd CGPM 1901).
fn reference(quantity: &str) -> f64 {
    let text = std::fs::read_to_string(common::data_dir().join("reference/unit-conversions.csv"))
        .expect("reference table");
    text.lines()
        .find_map(|l| {
            let (q, v) = l.split_once(',')?;
            (q == quantity).then(|| v.parse().expect("number"))
        })
        .unwrap_or_else(|| panic!("no {quantity} in the reference table"))
}

#[test]
fn every_suction_unit_is_stored_in_cm() {
    let cm_33 = reference("cm_at_33_kpa");
    let cm_1500 = reference("cm_at_1500_kpa");
    let cm_10 = reference("cm_at_10_kpa");
    // (column, three suctions written in that unit, meaning 10, 33 and 1500 kPa)
    let cases = [
        ("suction_cm", ["101.9716213", "336.5063503", "15295.74319"]),
        ("suction_hpa", ["100", "330", "15000"]),
        ("suction_kpa", ["10", "33", "1500"]),
        ("suction_mpa", ["0.01", "0.033", "1.5"]),
        ("suction_bar", ["0.1", "0.33", "15"]),
        ("pf", ["2.008479324", "2.526993264", "4.184570583"]),
    ];
    let s = Scratch::new();
    let mut files = Vec::new();
    for (column, values) in cases {
        let mut text = format!("site,top_cm,bottom_cm,sample,method,{column},theta\n");
        for (v, theta) in values.iter().zip(["0.3", "0.2", "0.1"]) {
            writeln!(text, "U,0,10,{column},plate,{v},{theta}").expect("write");
        }
        files.push(s.write(&format!("{column}.csv"), &text));
    }
    let refs: Vec<&str> = files.iter().map(String::as_str).collect();
    s.import_ok("lab", &refs);
    let conn = s.connect();
    for (column, _) in cases {
        let h: Vec<f64> = conn
            .prepare(
                "SELECT r.h_cm FROM reading r JOIN sample m ON r.sample_id = m.id
                 WHERE m.code = ?1 ORDER BY r.h_cm",
            )
            .expect("prepare")
            .query_map([column], |r| r.get(0))
            .expect("query")
            .collect::<Result<_, _>>()
            .expect("rows");
        assert_eq!(h.len(), 3, "{column}");
        for (got, want) in h.iter().zip([cm_10, cm_33, cm_1500]) {
            assert!(
                ((got - want) / want).abs() < 5e-9,
                "{column}: stored {got} cm, reference {want} cm"
            );
        }
    }
}

/// A campaign with sites, layers and two lab files.
fn full_campaign() -> Scratch {
    let s = Scratch::new();
    s.import_ok("sites", &["valid/sites.csv"]);
    s.import_ok("layers", &["valid/layers.csv"]);
    s.import_ok("lab", &["valid/lab_kpa.csv", "valid/lab_semicolon_bom.csv"]);
    s
}

#[test]
fn listings_state_units_and_lead_with_codes() {
    let s = full_campaign();
    let sites = s.list(&[]);
    let header = sites.lines().next().expect("header");
    assert!(header.starts_with("site  "), "{sites}");
    assert!(
        header.contains("latitude_deg") && header.contains("elevation_m"),
        "{header}"
    );
    assert!(
        sites.lines().nth(1).expect("row").starts_with("BS "),
        "{sites}"
    );
    // Columns line up: every row's second column starts where the header's does.
    let at = header.find("name").expect("name column");
    for line in sites.lines().skip(1) {
        assert_eq!(&line[at - 2..at], "  ", "misaligned:\n{sites}");
    }
    let layers = s.list(&["layers", "--site", "LV"]);
    assert!(layers.starts_with("layer "), "{layers}");
    assert!(layers.contains("LV:0-20") && layers.contains("bulk_density_g_cm3"));
    assert!(!layers.contains("TR:"), "--site filters: {layers}");
    let samples = s.list(&["samples"]);
    assert!(samples.starts_with("sample "), "{samples}");
    let readings = s.list(&["readings", "--sample", "LV-A1", "--units", "kpa"]);
    assert!(readings.starts_with("reading "), "{readings}");
    assert!(readings.contains("suction_kpa") && readings.contains("theta_m3_m3"));
    assert_eq!(
        readings.lines().count(),
        7,
        "header + 6 readings:\n{readings}"
    );
    let row_33 = readings
        .lines()
        .find(|l| l.contains(" 33 "))
        .expect("33 kPa row");
    assert!(row_33.contains("0.118"), "{row_33}");
}

#[test]
fn csv_listings_parse_back_and_readings_reimport_as_a_lab_file() {
    let s = full_campaign();
    let text = s.list(&["readings", "--format", "csv", "--units", "pf"]);
    let mut reader = csv::Reader::from_reader(text.as_bytes());
    let header = reader.headers().expect("header").clone();
    assert_eq!(&header[0], "reading");
    assert!(header.iter().any(|h| h == "pf"));
    let rows: Vec<csv::StringRecord> = reader.records().collect::<Result<_, _>>().expect("rows");
    assert_eq!(rows.len(), 13);
    let pf = header.iter().position(|h| h == "pf").expect("pf column");
    // 0 cm is pF minus infinity, written `-inf` (a pF column reads it back as saturation);
    // never an empty cell or NaN.
    assert!(rows.iter().any(|r| &r[pf] == "-inf"));
    assert!(rows.iter().all(|r| !r[pf].is_empty()));
    assert!(!text.contains("NaN"));
    // 33 kPa is pF 2.526993264 (reference table).
    let want = reference("pF_at_33_kpa");
    assert!(
        rows.iter()
            .any(|r| r[pf].parse::<f64>().is_ok_and(|v| (v - want).abs() < 1e-8))
    );
    // The listing is a lab file: a fresh campaign takes it whole, in pF too.
    for unit in ["kpa", "pf"] {
        let text = s.list(&["readings", "--format", "csv", "--units", unit]);
        let other = Scratch::new();
        let exported = other.write("exported.csv", &text);
        other.import_ok("lab", &[&exported]);
        assert_eq!(other.count("reading"), 13);
        assert_eq!(other.count("sample"), 3);
    }
}

/// Every reading of a campaign as (sample, suction, water content, weight) with the exact
/// bits of each number, sorted.
fn stored_bits(s: &Scratch) -> Vec<(String, u64, u64, Option<u64>, u64, u64)> {
    let conn = s.connect();
    let mut rows: Vec<(String, u64, u64, Option<u64>, u64, u64)> = conn
        .prepare(
            "SELECT m.code, r.h_cm, r.theta, r.weight, l.top_cm, l.bottom_cm
             FROM reading r JOIN sample m ON m.id = r.sample_id JOIN layer l ON l.id = m.layer_id",
        )
        .expect("prepare")
        .query_map([], |r| {
            Ok((
                r.get::<_, String>(0)?,
                r.get::<_, f64>(1)?.to_bits(),
                r.get::<_, f64>(2)?.to_bits(),
                r.get::<_, Option<f64>>(3)?.map(f64::to_bits),
                r.get::<_, f64>(4)?.to_bits(),
                r.get::<_, f64>(5)?.to_bits(),
            ))
        })
        .expect("query")
        .collect::<Result<_, _>>()
        .expect("rows");
    rows.sort();
    rows
}

#[test]
fn a_readings_listing_in_any_unit_imports_to_the_same_stored_values() {
    // Readings written in every unit with awkward decimals, saturation and the oven-dry
    // suction; listed in each unit and imported into a fresh campaign, every stored number
    // must come back bit for bit.
    let s = Scratch::new();
    let files = [
        (
            "kpa.csv",
            "site,top_cm,bottom_cm,sample,method,suction_kpa,theta,weight
             U,0,12.5,K1,plate,0,0.4321,1
             U,0,12.5,K1,plate,33,0.30000000000000004,2.5
             U,0,12.5,K1,plate,1500.123456789,0.1234567890123456,
             U,0,12.5,K1,oven,1000000,0,
",
        ),
        (
            "cm.csv",
            "site,top_cm,bottom_cm,sample,method,suction_cm,theta
             U,12.5,33.3,C1,column,0.1,0.45
             U,12.5,33.3,C1,column,336.5063503,0.3
             U,12.5,33.3,C1,plate,12345.678901234567,0.2
             U,12.5,33.3,C1,plate,7e-3,0.451
",
        ),
        (
            "pf.csv",
            "site,top_cm,bottom_cm,sample,method,pf,theta
             V,0,20,P1,column,-inf,0.5
             V,0,20,P1,plate,2.52699,0.33
             V,0,20,P1,plate,4.2,0.12
             V,0,20,P1,dew point,6.123456789,0.02
",
        ),
        (
            "hpa.csv",
            "site;top_cm;bottom_cm;sample;method;suction_hpa;theta_pct
             V;20;40;H1;plate;0,5;41,3
             V;20;40;H1;plate;330;30,7
",
        ),
        (
            "mpa_bar.csv",
            "site,top_cm,bottom_cm,sample,method,suction_mpa,theta
             V,40,60,M1,plate,0.0033,0.31
             V,40,60,M1,plate,1.5,0.11
",
        ),
        (
            "bar.csv",
            "site,top_cm,bottom_cm,sample,method,suction_bar,theta
             V,60,90,B1,plate,0.33,0.29
             V,60,90,B1,plate,15,0.1
",
        ),
    ];
    let paths: Vec<String> = files.iter().map(|(n, t)| s.write(n, t)).collect();
    let refs: Vec<&str> = paths.iter().map(String::as_str).collect();
    s.import_ok("lab", &refs);
    let want = stored_bits(&s);
    assert_eq!(want.len(), 18);
    for unit in ["cm", "hpa", "kpa", "mpa", "bar", "pf"] {
        let text = s.list(&["readings", "--format", "csv", "--units", unit]);
        assert!(!text.contains("NaN"), "{unit}:\n{text}");
        let other = Scratch::new();
        let listed = other.write(&format!("listed-{unit}.csv"), &text);
        other.import_ok("lab", &[&listed]);
        assert_eq!(stored_bits(&other), want, "{unit}:\n{text}");
    }
    // Values imported in a unit are listed in it as they were written.
    let kpa = s.list(&[
        "readings", "--format", "csv", "--units", "kpa", "--sample", "K1",
    ]);
    assert!(kpa.contains(",33,0.30000000000000004,"), "{kpa}");
    assert!(kpa.contains(",1500.123456789,"), "{kpa}");
    let pf = s.list(&[
        "readings", "--format", "csv", "--units", "pf", "--sample", "P1",
    ]);
    assert!(
        pf.contains(",-inf,0.5,") && pf.contains(",2.52699,"),
        "{pf}"
    );
    // `-inf` means saturation in a pF column only.
    let bad = s.write(
        "inf-kpa.csv",
        "site,top_cm,bottom_cm,sample,method,suction_kpa,theta
U,0,12.5,K2,plate,-inf,0.4
",
    );
    s.refused(
        "lab",
        &[&bad],
        &[],
        &["inf-kpa.csv:2:suction_kpa: found \"-inf\", expected a finite number"],
        1,
    );
}

#[test]
fn json_listings_parse() {
    let s = full_campaign();
    let text = s.list(&["samples", "--format", "json"]);
    let value: serde_json::Value = serde_json::from_str(&text).expect("valid JSON");
    let items = value.as_array().expect("array");
    assert_eq!(items.len(), 3);
    let lv = items
        .iter()
        .find(|i| i["sample"] == "LV-A1")
        .expect("LV-A1");
    assert_eq!(lv["readings"], 6);
    assert_eq!(lv["layer"], "LV:0-20");
    assert!((lv["bulk_density_g_cm3"].as_f64().expect("number") - 1.44).abs() < 1e-12);
    assert!(lv["collected_on"].is_null());
    assert_eq!(lv["uid"].as_str().expect("uid").len(), 36);
    let readings: serde_json::Value =
        serde_json::from_str(&s.list(&["readings", "--format", "json"])).expect("valid JSON");
    assert_eq!(readings.as_array().expect("array").len(), 13);
}

#[test]
fn list_filters_name_codes_that_exist() {
    let s = full_campaign();
    let assert = porewise()
        .args(["list"])
        .arg(&s.db)
        .args(["samples", "--site", "NOPE"])
        .assert()
        .code(1);
    assert!(
        stderr(&assert).contains("no site \"NOPE\""),
        "{}",
        stderr(&assert)
    );
    porewise()
        .arg("list")
        .arg(&s.db)
        .args(["readings", "--sample", "NOPE"])
        .assert()
        .code(1);
}

#[test]
fn init_refuses_to_overwrite_and_checks_its_settings() {
    let s = Scratch::new();
    s.import_ok("sites", &["valid/sites.csv"]);
    let before = std::fs::read(&s.db).expect("read");
    let assert = porewise().arg("init").arg(&s.db).assert().code(1);
    assert!(
        stderr(&assert).contains("already exists"),
        "{}",
        stderr(&assert)
    );
    assert_eq!(std::fs::read(&s.db).expect("read"), before);
    assert_eq!(s.count("site"), 3);
    let other = s.dir.path().join("other.sqlite");
    let assert = porewise()
        .arg("init")
        .arg(&other)
        .args(["--fc-kpa", "1500", "--pwp-kpa", "33"])
        .assert()
        .code(1);
    assert!(
        stderr(&assert).contains("wilting point 33 kPa"),
        "{}",
        stderr(&assert)
    );
    assert!(!other.exists(), "a refused init leaves no file");
    porewise()
        .arg("init")
        .arg(&other)
        .args(["--fc-kpa", "10"])
        .assert()
        .success();
    let fc: f64 = rusqlite::Connection::open(&other)
        .expect("open")
        .query_row("SELECT fc_kpa FROM campaign", [], |r| r.get(0))
        .expect("row");
    assert!((fc - 10.0).abs() < 1e-12);
}

#[test]
fn files_that_are_not_campaigns_are_refused() {
    let s = Scratch::new();
    let missing = s.dir.path().join("missing.sqlite");
    let assert = porewise().arg("list").arg(&missing).assert().code(1);
    assert!(
        stderr(&assert).contains("does not exist"),
        "{}",
        stderr(&assert)
    );
    assert!(!missing.exists(), "opening must not create a file");
    let text = s.write("notes.txt", "not a database at all, just some words\n");
    let assert = porewise().arg("list").arg(&text).assert().code(1);
    assert!(
        stderr(&assert).contains("is not a porewise campaign file"),
        "{}",
        stderr(&assert)
    );
    let assert = porewise()
        .args(["import", "lab"])
        .arg(&s.db)
        .arg("valid/no_such_file.csv")
        .assert()
        .code(1);
    assert!(
        stderr(&assert).contains("cannot read valid/no_such_file.csv"),
        "{}",
        stderr(&assert)
    );
}

#[test]
fn a_campaign_from_a_newer_porewise_is_refused() {
    let s = Scratch::new();
    s.connect()
        .pragma_update(None, "user_version", 99)
        .expect("set version");
    let assert = porewise().arg("list").arg(&s.db).assert().code(1);
    let err = stderr(&assert);
    assert!(err.contains("schema version 99"), "{err}");
    let known = porewise::store::migrate::latest_version();
    assert!(
        err.contains(&format!("knows versions up to {known}")),
        "{err}"
    );
    s.import("lab", &["valid/lab_kpa.csv"], &[]).code(1);
}

#[test]
fn usage_errors_exit_2_and_every_command_has_an_example() {
    porewise().args(["import", "lab"]).assert().code(2);
    porewise()
        .args(["list", "x.sqlite", "--format", "xml"])
        .assert()
        .code(2);
    porewise()
        .args(["list", "x.sqlite", "--units", "psi"])
        .assert()
        .code(2);
    for args in [
        &["init", "--help"][..],
        &["import", "sites", "--help"],
        &["import", "layers", "--help"],
        &["import", "lab", "--help"],
        &["list", "--help"],
    ] {
        let assert = porewise().args(args).assert().success();
        let out = stdout(&assert);
        assert!(out.contains("Example"), "{args:?}:\n{out}");
        assert!(out.contains("porewise "), "{args:?}:\n{out}");
    }
    let version = stdout(&porewise().arg("--version").assert().success());
    assert!(version.starts_with("porewise "), "{version}");
}

#[test]
fn the_oven_dry_suction_imports_in_every_unit_and_nothing_drier() {
    // 10^6 kPa, oven-dry soil, the dry end of Fredlund & Xing (1994): 1.0197e7 cm, pF 7.008479.
    let cases = [
        ("suction_kpa", "1000000"),
        ("suction_mpa", "1000"),
        ("suction_bar", "10000"),
        ("suction_hpa", "1e7"),
        ("suction_cm", "10197162.12"),
        ("pf", "7.008479"),
    ];
    let s = Scratch::new();
    let mut files = Vec::new();
    for (column, value) in cases {
        let text = format!(
            "site,top_cm,bottom_cm,sample,method,{column},theta\nU,0,10,{column},oven,{value},0\n"
        );
        files.push(s.write(&format!("{column}.csv"), &text));
    }
    let refs: Vec<&str> = files.iter().map(String::as_str).collect();
    s.import_ok("lab", &refs);
    let conn = s.connect();
    let h_dry = porewise::model::retention::fredlund_xing::H_DRY_CM;
    for (column, _) in cases {
        let h: f64 = conn
            .query_row(
                "SELECT r.h_cm FROM reading r JOIN sample m ON r.sample_id = m.id
                 WHERE m.code = ?1",
                [column],
                |r| r.get(0),
            )
            .expect("stored");
        assert!(((h - h_dry) / h_dry).abs() < 1e-6, "{column}: {h}");
    }
    let drier = s.write(
        "drier.csv",
        "site,top_cm,bottom_cm,sample,method,suction_kpa,theta\nU,0,10,D,oven,1000001,0\n",
    );
    s.refused(
        "lab",
        &[&drier],
        &[],
        &[
            "drier.csv:2:suction_kpa: found \"1000001\", expected a suction of at most 10^6 kPa \
           = 1.0197e7 cm (pF 7.01, oven dry)",
        ],
        1,
    );
}
