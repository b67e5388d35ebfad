//! `porewise review` in episodes through the real binary: consecutive suspect records of one
//! logger sensor with the same kind of reason are one row; deciding one decides them all in
//! one transaction; `--by-record` keeps the listing per record.

mod common;

use std::fmt::Write as _;

use common::{Scratch, stderr, stdout};

/// An invented tensiometer at 30 cm: hours 0-9 below the working range, hours 10-14 above
/// 85 kPa, hour 15 back at 60 kPa, hours 16-18 above again, then below.
fn logger(s: &Scratch) -> String {
    let mut text = String::from("site,depth_cm,sensor,sensor_id,time,value,unit\n");
    for h in 0..24 {
        let kpa = match h {
            10..=14 => 90.0 + f64::from(h),
            16..=18 => 120.0 - f64::from(h),
            15 => 60.0,
            _ => 20.0 + f64::from(h),
        };
        writeln!(
            text,
            "EPS,30,tensiometer,EPS-T30,2026-07-01T{h:02}:00:00Z,{kpa},kPa"
        )
        .expect("text");
    }
    s.write("logger.csv", &text)
}

fn csv(text: &str) -> (Vec<String>, Vec<Vec<String>>) {
    let mut lines = text.lines();
    let header = lines
        .next()
        .expect("header")
        .split(',')
        .map(str::to_string)
        .collect();
    let rows = lines
        .map(|l| l.split(',').map(str::to_string).collect())
        .collect();
    (header, rows)
}

fn col(header: &[String], name: &str) -> usize {
    header.iter().position(|h| h == name).expect("column")
}

fn queue(s: &Scratch, extra: &[&str]) -> (Vec<String>, Vec<Vec<String>>) {
    let out = common::porewise()
        .arg("review")
        .arg(&s.db)
        .args(["--no-refresh", "--format", "csv"])
        .args(extra)
        .assert()
        .success();
    csv(&stdout(&out))
}

fn status_counts(s: &Scratch) -> Vec<(String, i64)> {
    let conn = s.connect();
    let mut stmt = conn
        .prepare("SELECT status, count(*) FROM flag GROUP BY status ORDER BY status")
        .expect("prepare");
    stmt.query_map([], |r| Ok((r.get(0)?, r.get(1)?)))
        .expect("query")
        .collect::<Result<_, _>>()
        .expect("rows")
}

#[test]
fn consecutive_records_are_one_episode_and_are_decided_together() {
    let s = Scratch::new();
    let file = logger(&s);
    // Spikes off: only the working range is checked here.
    s.import("logger", &[&file], &["--spike", "off"]).success();

    let (hb, by_record) = queue(&s, &["--by-record"]);
    assert_eq!(by_record.len(), 8, "{by_record:?}");
    assert!(!hb.contains(&"records".to_string()));

    let (h, rows) = queue(&s, &[]);
    assert_eq!(rows.len(), 2, "{rows:?}");
    let field = |r: &Vec<String>, name: &str| r[col(&h, name)].clone();
    // Each spell with its span and number of records.
    let mut spans: Vec<(String, String, String)> = rows
        .iter()
        .map(|r| (field(r, "from"), field(r, "to"), field(r, "records")))
        .collect();
    spans.sort();
    assert_eq!(
        spans,
        vec![
            (
                "2026-07-01T10:00:00Z".to_string(),
                "2026-07-01T14:00:00Z".to_string(),
                "5".to_string()
            ),
            (
                "2026-07-01T16:00:00Z".to_string(),
                "2026-07-01T18:00:00Z".to_string(),
                "3".to_string()
            ),
        ]
    );
    assert!(rows.iter().all(|r| field(r, "sensor") == "EPS-T30"));
    let first = rows
        .iter()
        .find(|r| field(r, "records") == "5")
        .expect("first spell");
    let worst: f64 = field(first, "score").parse().expect("score");
    let by_record_scores: Vec<f64> = by_record
        .iter()
        .map(|r| r[col(&hb, "score")].parse().expect("score"))
        .collect();
    assert!(by_record_scores.iter().any(|&x| (x - worst).abs() < 1e-12));

    // A flag that is not in the queue decides nothing.
    let before = status_counts(&s);
    let refused = common::porewise()
        .arg("review")
        .arg(&s.db)
        .args(["--accept-episode", "99999"])
        .assert()
        .code(1);
    assert!(stderr(&refused).contains("flag 99999 is not an open suggestion"));
    assert_eq!(status_counts(&s), before);

    // Accept the five-hour spell by its listed flag: all five flags at once.
    let id = field(first, "flag");
    let out = common::porewise()
        .arg("review")
        .arg(&s.db)
        .args(["--accept-episode", &id, "--note", "dry spell"])
        .assert()
        .success();
    assert!(
        stdout(&out).contains("accepted 5 suggestions in 1 episode"),
        "{}",
        stdout(&out)
    );
    assert_eq!(
        status_counts(&s),
        vec![("accepted".to_string(), 5), ("suggested".to_string(), 3)]
    );
    let (_, rows) = queue(&s, &[]);
    assert_eq!(rows.len(), 1);
    let other = rows[0][col(&h, "flag")].clone();
    common::porewise()
        .arg("review")
        .arg(&s.db)
        .args(["--dismiss-episode", &other])
        .assert()
        .success();
    assert_eq!(
        status_counts(&s),
        vec![("accepted".to_string(), 5), ("dismissed".to_string(), 3)]
    );
    assert!(queue(&s, &[]).1.is_empty());
}
