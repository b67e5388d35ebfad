//! `porewise import logger --columns map.csv [--skip-lines N]` through the real binary: wide
//! logger exports (a time column, then one column per channel) stored exactly as their long
//! form, with the same checks, errors naming the wide column, and preamble lines counted.

mod common;

use std::fmt::Write as _;

use common::{Scratch, stderr, stdout};

const MAP: &str = "column,site,depth_cm,sensor,sensor_id,unit\n\
    T30_kPa,WDS,30,tensiometer,WDS-T30,kPa\n\
    VWC30_pct,WDS,30,water_content,WDS-W30,%\n\
    T60_hPa,WDS,60,tensiometer,WDS-T60,hPa\n";

/// Three lines of invented logger preamble.
const PREAMBLE: &str =
    "\"Logger WDS-1\",\"invented station\"\n\"firmware 0.0\"\nunits,kPa,%,V,hPa\n";

/// Hourly values of the three channels over `hours` hours (and a battery column not mapped);
/// the 60 cm tensiometer misses every fifth hour; the 30 cm one climbs past 85 kPa at the end.
fn season(hours: usize) -> Vec<(String, f64, f64, Option<f64>)> {
    (0..hours)
        .map(|i| {
            let time = format!("2026-05-{:02}T{:02}:00:00+02:00", 1 + i / 24, i % 24);
            let t30 = 10.0 + 0.8 * i as f64;
            let w30 = 34.0 - 0.1 * i as f64;
            let t60 = (i % 5 != 4).then_some(150.0 + 2.5 * i as f64);
            (time, t30, w30, t60)
        })
        .collect()
}

fn wide_text(rows: &[(String, f64, f64, Option<f64>)]) -> String {
    let mut text = String::from(PREAMBLE);
    text.push_str("time,T30_kPa,VWC30_pct,battery_V,T60_hPa\n");
    for (time, t30, w30, t60) in rows {
        let t60 = t60.map(|v| v.to_string()).unwrap_or_default();
        writeln!(text, "{time},{t30},{w30},12.6,{t60}").expect("text");
    }
    text
}

fn long_text(rows: &[(String, f64, f64, Option<f64>)]) -> String {
    let mut text = String::from("site,depth_cm,sensor,sensor_id,time,value,unit\n");
    for (time, t30, w30, t60) in rows {
        writeln!(text, "WDS,30,tensiometer,WDS-T30,{time},{t30},kPa").expect("text");
        writeln!(text, "WDS,30,water_content,WDS-W30,{time},{w30},%").expect("text");
        if let Some(v) = t60 {
            writeln!(text, "WDS,60,tensiometer,WDS-T60,{time},{v},hPa").expect("text");
        }
    }
    text
}

/// Every stored record (sensor id, time, value) and every flag reason on one.
fn stored(s: &Scratch) -> (Vec<(String, String, f64)>, Vec<String>) {
    let conn = s.connect();
    let mut stmt = conn
        .prepare("SELECT sensor_id, time, value FROM logger_view ORDER BY sensor_id, time")
        .expect("prepare");
    let records = stmt
        .query_map([], |r| Ok((r.get(0)?, r.get(1)?, r.get(2)?)))
        .expect("query")
        .collect::<Result<_, _>>()
        .expect("rows");
    let mut stmt = conn
        .prepare(
            "SELECT l.sensor_id || ' ' || l.time || ' ' || f.reason FROM flag f \
             JOIN logger_view l ON l.id = f.logger_record_id ORDER BY 1",
        )
        .expect("prepare");
    let flags = stmt
        .query_map([], |r| r.get(0))
        .expect("query")
        .collect::<Result<_, _>>()
        .expect("rows");
    (records, flags)
}

#[test]
fn a_wide_file_with_a_map_stores_what_its_long_form_stores() {
    let rows = season(120);
    let s = Scratch::new();
    let map = s.write("map.csv", MAP);
    let wide = s.write("wide.csv", &wide_text(&rows));
    let out = s
        .import(
            "logger",
            &[&wide],
            &["--columns", &map, "--skip-lines", "3"],
        )
        .success();
    let err = stderr(&out);
    assert!(
        err.contains("wide.csv:4:battery_V: warning: found the column \"battery_V\", which porewise does not read"),
        "{err}"
    );
    assert!(stdout(&out).contains("3 sensors"), "{}", stdout(&out));

    let t = Scratch::new();
    let long = t.write("long.csv", &long_text(&rows));
    t.import("logger", &[&long], &[]).success();
    let (wide_records, wide_flags) = stored(&s);
    let (long_records, long_flags) = stored(&t);
    assert_eq!(wide_records.len(), 120 * 2 + 96);
    assert_eq!(wide_records, long_records);
    // The same quality checks: the 30 cm tensiometer passes 85 kPa after 94 hours.
    assert!(!wide_flags.is_empty());
    assert_eq!(wide_flags, long_flags);

    // Re-import is refused by content, as for the long form.
    let again = s
        .import(
            "logger",
            &[&wide],
            &["--columns", &map, "--skip-lines", "3"],
        )
        .code(1);
    assert!(stderr(&again).contains("this content was already imported"));
}

#[test]
fn bad_cells_name_the_wide_column_and_count_preamble_lines() {
    let mut text = wide_text(&season(6));
    text = text.replace(",10.8,", ",x10,"); // hour 1, line 6
    text = text.replace("2026-05-01T03:00:00+02:00", "01/05/2026 03:00"); // line 8
    text = text.replace(",33.6,", ",133.6,"); // hour 4, line 9
    let s = Scratch::new();
    let map = s.write("map.csv", MAP);
    let wide = s.write("wide.csv", &text);
    s.refused(
        "logger",
        &[&wide],
        &["--columns", &map, "--skip-lines", "3"],
        &[
            "wide.csv:6:T30_kPa: found \"x10\", expected a number",
            "wide.csv:8:time: found \"01/05/2026 03:00\", expected an ISO 8601 date and time",
            "wide.csv:9:VWC30_pct: found \"133.6\", expected a volumetric water content from 0 \
             to 100 %",
        ],
        // One problem for the bad time, not one per channel.
        3,
    );
}

#[test]
fn map_and_header_problems_are_placed() {
    let s = Scratch::new();
    let bad_map = s.write(
        "map.csv",
        "column,site,depth_cm,sensor,sensor_id,unit\n\
         T30_kPa,WDS,30,tensiometer,WDS-T30,%\n\
         VWC30_pct,WDS,30,water_content,WDS-T30,%\n",
    );
    let wide = s.write("wide.csv", &wide_text(&season(3)));
    s.refused(
        "logger",
        &[&wide],
        &["--columns", &bad_map, "--skip-lines", "3"],
        &[
            "map.csv:2:unit: found \"%\" for a tensiometer, expected a suction unit",
            "map.csv:3:sensor_id: found sensor \"WDS-T30\" of site \"WDS\" again (first at",
        ],
        2,
    );

    let map = s.write(
        "map2.csv",
        &format!("{MAP}T90_kPa,WDS,90,tensiometer,WDS-T90,kPa\n"),
    );
    s.refused(
        "logger",
        &[&wide],
        &["--columns", &map, "--skip-lines", "3"],
        &["wide.csv:4:-: found no column \"T90_kPa\" in the header, which"],
        1,
    );
    // Without --skip-lines the preamble's first line is taken for the header.
    s.refused(
        "logger",
        &[&wide],
        &["--columns", &map],
        &["wide.csv:1:-: found no column \"T30_kPa\" in the header"],
        4,
    );
    let short = s.write("short.csv", "one line\n");
    s.refused(
        "logger",
        &[&short],
        &["--skip-lines", "3"],
        &["short.csv:1:-: found 1 line in the file, expected a header row after the 3 lines that --skip-lines 3 skips"],
        1,
    );
}

#[test]
fn skip_lines_works_for_the_long_form_too() {
    let s = Scratch::new();
    let rows = season(4);
    let text = format!("exported by an invented logger\n{}", long_text(&rows));
    let long = s.write(
        "long.csv",
        &text.replacen(
            "WDS,30,tensiometer,WDS-T30,2026-05-01T01:00:00+02:00,10.8",
            "WDS,30,tensiometer,WDS-T30,2026-05-01T01:00:00+02:00,bad",
            1,
        ),
    );
    s.refused(
        "logger",
        &[&long],
        &["--skip-lines", "1"],
        &["long.csv:6:value: found \"bad\", expected a number"],
        1,
    );
}

#[test]
fn a_workbook_given_to_the_logger_import_is_refused_with_a_reason() {
    let s = Scratch::new();
    let book = s.write("station.xlsx", "not really a workbook");
    let out = s.import("logger", &[&book], &[]).code(1);
    assert!(
        stderr(&out).contains("station.xlsx: logger files are read as CSV text"),
        "{}",
        stderr(&out)
    );
    assert_eq!(s.count("logger_record"), 0);
}
