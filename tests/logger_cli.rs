//! `porewise import logger` through the real binary: every class of bad row with its exact
//! `FILE:LINE:COLUMN` and nothing written, time zones, duplicates, dry runs, re-import
//! refusal, a file cut off mid-line, and the quality flags an import suggests.

mod common;

use std::fmt::Write as _;

use common::{Scratch, stderr, stdout};

/// Import logger `files` with `extra` options and require a refusal that changes nothing.
fn rejects(s: &Scratch, files: &[&str], extra: &[&str], expected: &[&str], problems: usize) {
    s.refused("logger", files, extra, expected, problems);
}

#[test]
fn every_bad_row_class_is_placed_and_nothing_is_written() {
    let f = "invalid/logger_bad_rows.csv";
    let expected = [
        "3:sensor: found \"tensio\", expected a sensor (tensiometer, water_content)",
        "4:site: found an empty cell, expected a site code",
        "5:sensor_id: found an empty cell, expected a sensor id",
        "6:depth_cm: found \"-5\", expected a depth below the surface of 0 or from 0.01 to \
         10000 cm (100 m)",
        "7:depth_cm: found \"abc\", expected a number",
        "8:time: found \"01/05/2026 06:00\", expected an ISO 8601 date and time such as \
         2026-05-01T12:00:00+02:00",
        "9:time: found \"2026-05-01T07:00:00\" without a UTC offset, expected a time with its \
         offset (2026-05-01T12:00:00+02:00 or ...Z), or --utc-offset +HH:MM for the whole file",
        "10:time: found \"2026-02-30T08:00:00+02:00\", which is not a calendar date and time of \
         day",
        "11:time: found \"2026-05-01T09:00:00.5+02:00\" with a fraction of a second, expected \
         whole seconds",
        "12:value: found \"x12\", expected a number",
        "13:value: found \"NaN\", expected a finite number",
        "14:unit: found \"psi\", expected a suction unit (cm, hpa, kpa, mpa, bar) or a \
         water-content unit (fraction, m3/m3, percent, %)",
        "15:unit: found \"%\" for a tensiometer, expected a suction unit (cm, hpa, kpa, mpa, bar)",
        "16:unit: found \"kPa\" for a water-content sensor, expected a water-content unit \
         (fraction, m3/m3, percent, %)",
        "17:value: found \"1.2\", expected a volumetric water content from 0 to 1 m3/m3",
        "18:value: found \"104\", expected a volumetric water content from 0 to 100 %",
        "19:value: found \"-2000 MPa\", expected a suction of at most 1e7 cm (pF 7, oven dry)",
        "20:-: found 6 fields, expected 7 (one per header column)",
        "21:depth_cm: found sensor \"LV-T30\" of site \"LV\" at 45 cm, but \
         invalid/logger_bad_rows.csv:2 has it at 30 cm; expected one depth per sensor",
        "22:sensor: found sensor \"LV-T30\" of site \"LV\" as water_content, but \
         invalid/logger_bad_rows.csv:2 has it as tensiometer; expected one kind per sensor",
        "23:time: found a second record of sensor \"LV-T30\" at site \"LV\" for \
         2026-04-30T22:00:00Z (2026-05-01T00:00:00+02:00 as written), first at \
         invalid/logger_bad_rows.csv:2; expected one record per sensor and time",
    ];
    let expected: Vec<String> = expected.iter().map(|e| format!("{f}:{e}")).collect();
    let expected: Vec<&str> = expected.iter().map(String::as_str).collect();
    let s = Scratch::new();
    rejects(&s, &[f], &[], &expected, 21);
    // With --dry-run the same problems are found, and still nothing is written.
    rejects(&s, &[f], &["--dry-run"], &expected, 21);
}

#[test]
fn header_and_file_problems() {
    let s = Scratch::new();
    rejects(
        &s,
        &[
            "invalid/logger_missing_column.csv",
            "invalid/logger_header_only.csv",
            "invalid/empty.csv",
        ],
        &[],
        &[
            "invalid/logger_missing_column.csv:1:unit: found no column \"unit\" in the header, \
             expected the columns site,depth_cm,sensor,sensor_id,time,value,unit",
            "invalid/logger_header_only.csv:1:-: found a header row and no data rows",
            "invalid/empty.csv:1:-: the file is empty",
        ],
        3,
    );
}

#[test]
fn a_file_cut_off_mid_line_is_refused_whole() {
    let s = Scratch::new();
    rejects(
        &s,
        &["invalid/logger_cut_off.csv"],
        &[],
        &[
            "invalid/logger_cut_off.csv:5:-: found 6 fields, expected 7 (one per header column)",
            "invalid/logger_cut_off.csv:5:-: the file ends in the middle of this line (no line \
             break after it): it looks cut off",
        ],
        2,
    );
    assert_eq!(s.count("logger_record"), 0);
    // A complete last line without a final line break is fine.
    let whole = s.write(
        "no-final-newline.csv",
        "site,depth_cm,sensor,sensor_id,time,value,unit\n\
         LV,30,tensiometer,LV-T30,2026-05-01T00:00:00Z,-12.5,kPa",
    );
    s.import("logger", &[&whole], &[]).success();
    assert_eq!(s.count("logger_record"), 1);
}

#[test]
fn a_good_file_is_stored_in_canonical_units_and_utc_with_flags() {
    let s = Scratch::new();
    let out = stdout(
        &s.import("logger", &["valid/logger_station.csv"], &[])
            .success(),
    );
    assert_eq!(
        out.trim(),
        "added 32 logger records (16 tensiometer, 16 water content) of 4 sensors from 1 file; \
         added 2 new sites: LV, TR; suggested 10 quality flags (2 beyond working range, 7 \
         stuck, 1 spike)"
    );
    let conn = s.connect();
    let record = |sensor: &str, line: i64| -> (String, f64) {
        conn.query_row(
            "SELECT time, value FROM logger_view WHERE sensor_id = ?1 AND source_line = ?2",
            rusqlite::params![sensor, line],
            |r| Ok((r.get(0)?, r.get(1)?)),
        )
        .expect("record")
    };
    // -60 kPa at 00:00+02:00 is a suction of 60 kPa = 611.83 cm at 22:00 UTC the day before
    // (1 kPa = 10.19716213 cm, DESIGN.md; tests/data/reference/unit-conversions.csv).
    let (time, h) = record("LV-T30", 2);
    assert_eq!(time, "2026-04-30T22:00:00Z");
    assert!((h - 60.0 * 10.197_162_13).abs() < 1e-6, "{h}");
    let (_, theta) = record("LV-W30", 3);
    assert!((theta - 31.8 / 100.0).abs() < 1e-12);
    // Every unit of the format: hPa, cm, bar, MPa; m3/m3, fraction, percent, %.
    let units = [
        ("TR-T15", 26, 120.0 * 1.019_716_213),
        ("TR-T15", 27, 150.0),
        ("TR-T15", 28, 0.13 * 1_019.716_213),
        ("TR-T15", 29, 0.014 * 10_197.162_13),
        ("TR-W15", 30, 0.25),
        ("TR-W15", 31, 0.255),
        ("TR-W15", 32, 0.259),
        ("TR-W15", 33, 0.261),
    ];
    for (sensor, line, want) in units {
        let (_, got) = record(sensor, line);
        assert!(
            (got - want).abs() < 1e-6 * want,
            "{sensor} line {line}: {got} vs {want}"
        );
    }
    // The flags: suggested, automatic, with reasons and scores, on the right records.
    let mut stmt = conn
        .prepare(
            "SELECT r.source_line, f.reason, f.score, f.origin, f.status FROM flag f
             JOIN logger_record r ON r.id = f.logger_record_id ORDER BY r.source_line",
        )
        .expect("prepare");
    let flags: Vec<(i64, String, f64, String, String)> = stmt
        .query_map([], |r| {
            Ok((r.get(0)?, r.get(1)?, r.get(2)?, r.get(3)?, r.get(4)?))
        })
        .expect("query")
        .collect::<Result<_, _>>()
        .expect("rows");
    let lines: Vec<i64> = flags.iter().map(|f| f.0).collect();
    assert_eq!(lines, vec![7, 9, 11, 13, 15, 17, 19, 22, 23, 24]);
    assert!(flags.iter().all(|f| f.3 == "auto" && f.4 == "suggested"));
    assert_eq!(
        flags[0].1,
        "stuck sensor: the same value (0.31 m3/m3) for at least 6 h (since 2026-05-01T00:00:00Z)"
    );
    assert_eq!(
        flags[7].1,
        "tensiometer beyond working range (86 kPa > 85 kPa)"
    );
    assert!((flags[7].2 - 86.0 / 85.0).abs() < 1e-12);
    assert_eq!(
        flags[8].1,
        "spike: a jump of +0.096 m3/m3 from 0.306 m3/m3 that comes back within 1 record"
    );
    assert_eq!(
        flags[9].1,
        "tensiometer beyond working range (91.2 kPa > 85 kPa)"
    );
    // The import batch records the file and its row count.
    let (kind, rows): (String, i64) = conn
        .query_row("SELECT kind, rows FROM import_batch", [], |r| {
            Ok((r.get(0)?, r.get(1)?))
        })
        .expect("batch");
    assert_eq!((kind.as_str(), rows), ("logger", 32));
}

#[test]
fn checks_follow_their_settings() {
    let s = Scratch::new();
    let out = stdout(
        &s.import(
            "logger",
            &["valid/logger_station.csv"],
            &[
                "--tensiometer-limit-kpa",
                "90",
                "--stuck-span",
                "off",
                "--spike",
                "0.2",
            ],
        )
        .success(),
    );
    assert!(
        out.ends_with("; suggested 1 quality flag (1 beyond working range)\n"),
        "{out}"
    );
    let usage = s
        .import(
            "logger",
            &["valid/logger_station.csv"],
            &["--spike", "5psi"],
        )
        .code(2);
    assert!(stderr(&usage).contains("expected a jump such as 10kpa"));
}

#[test]
fn times_without_an_offset_need_one_for_the_file() {
    let s = Scratch::new();
    let f = "valid/logger_local_times.csv";
    rejects(
        &s,
        &[f],
        &[],
        &[
            "valid/logger_local_times.csv:2:time: found \"2026-05-01 08:00\" without a UTC offset",
            "valid/logger_local_times.csv:3:time: found \"2026-05-01 09:00\" without a UTC offset",
        ],
        2,
    );
    s.import("logger", &[f], &["--utc-offset", "+01:00"])
        .success();
    let conn = s.connect();
    let times: Vec<String> = conn
        .prepare("SELECT time FROM logger_view ORDER BY source_line")
        .expect("prepare")
        .query_map([], |r| r.get(0))
        .expect("query")
        .collect::<Result<_, _>>()
        .expect("rows");
    // Local times take the file's offset; a time with its own (Z) keeps it.
    assert_eq!(
        times,
        [
            "2026-05-01T07:00:00Z",
            "2026-05-01T08:00:00Z",
            "2026-05-01T10:00:00Z"
        ]
    );
    let bad = s.import("logger", &[f], &["--utc-offset", "01:00"]).code(2);
    assert!(stderr(&bad).contains("expected a UTC offset such as +02:00"));
}

#[test]
fn duplicates_are_errors_unless_skipped() {
    let s = Scratch::new();
    s.import("logger", &["valid/logger_station.csv"], &[])
        .success();
    rejects(
        &s,
        &["invalid/logger_conflicts_campaign.csv"],
        &[],
        &[
            "invalid/logger_conflicts_campaign.csv:3:time: found a second record of sensor \
             \"LV-T30\" at site \"LV\" for 2026-04-30T22:00:00Z (2026-05-01T00:00:00+02:00 as \
             written), which the campaign already holds (from valid/logger_station.csv:2)",
            "invalid/logger_conflicts_campaign.csv:4:depth_cm: found sensor \"LV-W30\" of site \
             \"LV\" at 40 cm, but the campaign (from valid/logger_station.csv:25) has it at 30 cm",
        ],
        2,
    );
    // Skipping duplicates does not excuse the depth.
    rejects(
        &s,
        &["invalid/logger_conflicts_campaign.csv"],
        &["--skip-duplicates"],
        &["invalid/logger_conflicts_campaign.csv:4:depth_cm:"],
        1,
    );
    // A file of repeats and new records: the repeats are skipped and counted.
    let more = s.write(
        "more.csv",
        "site,depth_cm,sensor,sensor_id,time,value,unit\n\
         LV,30,tensiometer,LV-T30,2026-05-01T00:00:00+02:00,-60.0,kPa\n\
         LV,30,tensiometer,LV-T30,2026-05-01T01:00:00+02:00,-62.5,kPa\n\
         LV,30,tensiometer,LV-T30,2026-05-01T12:00:00+02:00,-93.0,kPa\n\
         LV,30,tensiometer,LV-T30,2026-05-01T12:00:00+02:00,-93.0,kPa\n",
    );
    let out = stdout(
        &s.import("logger", &[&more], &["--skip-duplicates"])
            .success(),
    );
    assert!(
        out.starts_with("added 1 logger record (1 tensiometer, 0 water content) of 1 sensor"),
        "{out}"
    );
    assert!(
        out.contains("skipped 3 duplicates (1 with a different value)"),
        "{out}"
    );
    assert_eq!(s.count("logger_record"), 33);
}

#[test]
fn dry_runs_write_nothing_and_imports_are_not_repeated() {
    let s = Scratch::new();
    let before = s.counts();
    let out = stdout(
        &s.import("logger", &["valid/logger_station.csv"], &["--dry-run"])
            .success(),
    );
    assert_eq!(
        out.trim(),
        "dry run: 1 file valid; would add 32 logger records (16 tensiometer, 16 water content) \
         of 4 sensors; would add 2 new sites: LV, TR; would suggest 10 quality flags (2 beyond \
         working range, 7 stuck, 1 spike); nothing was written"
    );
    assert_eq!(s.counts(), before);
    s.import("logger", &["valid/logger_station.csv"], &[])
        .success();
    let after = s.counts();
    let again = s
        .import("logger", &["valid/logger_station.csv"], &[])
        .code(1);
    let err = stderr(&again);
    assert!(
        err.contains("valid/logger_station.csv: this content was already imported on 20")
            && err.contains("use --force to import it again"),
        "{err}"
    );
    assert_eq!(s.counts(), after);
    // Forced, every record is a duplicate of itself; skipping them adds nothing new.
    let forced = s.import("logger", &["valid/logger_station.csv"], &["--force"]);
    assert!(stderr(&forced.code(1)).contains("32 problems found"));
    let out = stdout(
        &s.import(
            "logger",
            &["valid/logger_station.csv"],
            &["--force", "--skip-duplicates"],
        )
        .success(),
    );
    assert!(out.contains("added 0 logger records"), "{out}");
    assert!(out.contains("skipped 32 duplicates (0 with a different value)"));
    assert_eq!(s.count("logger_record"), 32);
    assert_eq!(s.count("flag"), 10);
}

#[test]
fn out_of_order_rows_and_later_files_are_checked_over_the_whole_series() {
    // The stuck run of valid/logger_station.csv, with its rows reversed and split over two
    // imports: the marks are found just the same.
    let s = Scratch::new();
    let header = "site,depth_cm,sensor,sensor_id,time,value,unit\n";
    let row = |hour: u32, value: f64| {
        format!("LV,30,water_content,LV-W30,2026-05-01T{hour:02}:00:00Z,{value},%\n")
    };
    let values = [
        31.8, 31.4, 31.0, 31.0, 31.0, 31.0, 31.0, 31.0, 31.0, 30.6, 40.2, 30.4,
    ];
    let mut first = String::from(header);
    for h in (0..6).rev() {
        first.push_str(&row(h, values[h as usize]));
    }
    let mut second = String::from(header);
    for h in 6..12 {
        second.push_str(&row(h, values[h as usize]));
    }
    let a = s.write("first.csv", &first);
    let b = s.write("second.csv", &second);
    let out = stdout(&s.import("logger", &[&a], &[]).success());
    assert!(out.ends_with("suggested 0 quality flags\n"), "{out}");
    let out = stdout(&s.import("logger", &[&b], &[]).success());
    // Hours 2-8 are stuck (four of them came with the first file, which already went in);
    // hour 10 is a spike.
    assert!(
        out.ends_with("suggested 4 quality flags (3 stuck, 1 spike)\n"),
        "{out}"
    );
    // All in one file, out of order: one check over the sorted series at the end.
    let again = Scratch::new();
    let both = s.write("both.csv", &format!("{first}{}", &second[header.len()..]));
    let out = stdout(&again.import("logger", &[&both], &[]).success());
    assert!(
        out.ends_with("suggested 8 quality flags (7 stuck, 1 spike)\n"),
        "{out}"
    );
}

#[test]
fn at_most_fifty_problems_are_listed() {
    let s = Scratch::new();
    let mut text = String::from("site,depth_cm,sensor,sensor_id,time,value,unit\n");
    for i in 0..70 {
        writeln!(text, "LV,30,tensiometer,T{i},2026-05-01T00:00:00Z,-1,psi").expect("write");
    }
    let file = s.write("many.csv", &text);
    let assert = s.import("logger", &[&file], &[]).code(1);
    let err = stderr(&assert);
    assert_eq!(err.lines().filter(|l| l.contains("many.csv:")).count(), 50);
    assert!(err.contains("... and 20 more problems not listed"), "{err}");
    assert!(err.contains("70 problems found; nothing was written"));
    assert_eq!(s.count("logger_record"), 0);
}

/// A long-form file of `sensors` water-content sensors at site LV, one record each every
/// hour from hour `from` to `to` (exclusive), rows interleaved by time as a logger network
/// exports them; values step with the hour and sensor (plus `bump` from hour `bump_from`).
fn season(sensors: usize, from: usize, to: usize, bump: f64, bump_from: usize) -> String {
    let mut text = String::from("site,depth_cm,sensor,sensor_id,time,value,unit\n");
    let start = chrono::DateTime::from_timestamp(1_777_593_600, 0).expect("2026-05-01");
    for hour in from..to {
        let t = (start + chrono::Duration::hours(hour as i64)).format("%Y-%m-%dT%H:%M:%SZ");
        for k in 0..sensors {
            let mut v = 20.0 + ((hour * 7 + k * 3) % 40) as f64 * 0.25;
            if hour >= bump_from {
                v += bump;
            }
            writeln!(text, "LV,{},water_content,W{k:02},{t},{v},%", 10 * (k + 1)).expect("write");
        }
    }
    text
}

#[test]
fn repeats_in_a_large_file_are_found_and_skipped_as_in_a_small_one() {
    // Many insert statements' worth of rows: the import writes them in chunks and goes one
    // by one around repeats; ids, counts and messages must not show it.
    let s = Scratch::new();
    let a = s.write("a.csv", &season(20, 0, 100, 0.0, 0));
    s.import_ok("logger", &[&a]);
    let conn = s.connect();
    let off: i64 = conn
        .query_row(
            "SELECT count(*) FROM logger_record WHERE id <> source_line - 1",
            [],
            |r| r.get(0),
        )
        .expect("ids");
    assert_eq!(off, 0, "records take their ids in the file's order");
    // Hours 50-149: the first 50 hours repeat stored records, 100 of them (hour 95 on) with
    // another value.
    let b = s.write("b.csv", &season(20, 50, 150, 0.5, 95));
    let refused = s.import("logger", &[&b], &[]).code(1);
    let err = stderr(&refused);
    assert!(
        err.contains("1000 problems found; nothing was written"),
        "{err}"
    );
    let first = format!(
        "{b}:2:time: found a second record of sensor \"W00\" at site \"LV\" for \
         2026-05-03T02:00:00Z, which the campaign already holds (from {a}:1002); expected \
         one record per sensor and time"
    );
    assert!(err.starts_with(&format!("error: {first}")), "{err}");
    assert_eq!(
        err.lines()
            .filter(|l| l.contains(":time: found a second"))
            .count(),
        50
    );
    assert_eq!(s.count("logger_record"), 2000);
    let out = stdout(&s.import("logger", &[&b], &["--skip-duplicates"]).success());
    assert!(
        out.contains("added 1000 logger records (0 tensiometer, 1000 water content)"),
        "{out}"
    );
    assert!(
        out.contains("skipped 1000 duplicates (100 with a different value)"),
        "{out}"
    );
    // The new records follow on without a gap, in the file's order.
    let (lowest, highest, out_of_order): (i64, i64, i64) = conn
        .query_row(
            "SELECT min(id), max(id), sum(id - 2000 <> source_line - 1001) FROM logger_record
             WHERE batch_id = (SELECT max(id) FROM import_batch)",
            [],
            |r| Ok((r.get(0)?, r.get(1)?, r.get(2)?)),
        )
        .expect("new ids");
    assert_eq!((lowest, highest, out_of_order), (2001, 3000, 0));
}

#[cfg(unix)]
#[test]
fn kill_nine_during_an_import_leaves_the_campaign_as_it_was_or_whole() {
    let s = Scratch::new();
    let first = s.write("first.csv", &season(10, 0, 10, 0.0, 0));
    s.import_ok("logger", &[&first]);
    let big = s.write("big.csv", &season(40, 10, 3010, 0.0, 0));
    let template = s.dir.path().join("template.sqlite");
    std::fs::copy(&s.db, &template).expect("copy");
    let before = s.counts();
    let started = std::time::Instant::now();
    s.import_ok("logger", &[&big]);
    let whole = started.elapsed();
    let after = s.counts();
    assert_ne!(before, after);
    let note = porewise::store::holder::note_path(&s.db);
    let (mut killed, mut in_write) = (0, 0);
    for fraction in [0.1, 0.3, 0.5, 0.7, 0.85, 0.95] {
        for ext in ["", "-wal", "-shm", "-writer"] {
            let _ = std::fs::remove_file(format!("{}{ext}", s.db.display()));
        }
        std::fs::copy(&template, &s.db).expect("fresh copy");
        let mut child = common::porewise_std()
            .args(["import", "logger"])
            .arg(&s.db)
            .arg(&big)
            .stdout(std::process::Stdio::null())
            .stderr(std::process::Stdio::null())
            .spawn()
            .expect("spawn");
        std::thread::sleep(whole.mul_f64(fraction));
        if child.try_wait().expect("wait").is_none() {
            child.kill().expect("kill -9");
            killed += 1;
        }
        child.wait().expect("reaped");
        let writing = note.exists();
        let integrity: String = s
            .connect()
            .query_row("PRAGMA integrity_check", [], |r| r.get(0))
            .expect("integrity");
        assert_eq!(integrity, "ok");
        let now = s.counts();
        assert!(
            now == before || now == after,
            "a killed import left the campaign half-written: {now:?}"
        );
        in_write += usize::from(writing && now == before);
    }
    assert!(
        in_write > 0,
        "no run was stopped inside the write ({killed} killed, {whole:?})"
    );
}
