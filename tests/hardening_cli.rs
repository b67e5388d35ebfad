//! Hostile and malformed input through the real binary: spreadsheet formulas and terminal
//! escapes in codes and names, measuring days and depths that cannot be stored, control
//! characters in codes, columns porewise does not read, overlapping layers, and campaigns
//! holding values an older porewise let in.

mod common;

use std::fmt::Write as _;

use common::{Scratch, porewise, stderr, stdout};
use porewise::model::retention::ModelKind;

/// van Genuchten parameters of a loam (theta_r, theta_s, alpha 1/cm, n): Carsel & Parrish
/// (1988), table 3; used only to make plausible readings.
const LOAM: [f64; 4] = [0.078, 0.43, 0.036, 1.56];

/// Typical lab suctions, cm (common practice: hanging column, sandbox, pressure plates).
const SUCTIONS_CM: [f64; 8] = [0.0, 10.0, 30.0, 100.0, 330.0, 1000.0, 3000.0, 15000.0];

/// Cells that spreadsheets take for formulas: one for each first character that makes them
/// do so (`=`, `+`, `-`, `@`, tab, carriage return; common practice, "CSV injection").
const PAYLOADS: [&str; 6] = [
    "=HYPERLINK(\"http://example.invalid/\",\"open\")",
    "+cmd|' /C calc'!A0",
    "-2+3+cmd|' /C calc'!A0",
    "@SUM(1+1)*cmd|' /C calc'!A0",
    "\t=1+1",
    "\r=2+2",
];

/// The first characters that make a cell a formula.
const FORMULA_START: [char; 6] = ['=', '+', '-', '@', '\t', '\r'];

/// A CSV field, quoted.
fn q(text: &str) -> String {
    format!("\"{}\"", text.replace('"', "\"\""))
}

/// A lab sheet row per suction of `SUCTIONS_CM` for each (site, top, bottom, sample), with
/// a small deterministic scatter so fits have residuals.
fn lab_rows(samples: &[(&str, f64, f64, &str)]) -> String {
    let vg = ModelKind::VanGenuchten.curve();
    let mut text = String::from("site,top_cm,bottom_cm,sample,method,suction_cm,theta\n");
    for (site, top, bottom, code) in samples {
        for (i, h) in SUCTIONS_CM.iter().enumerate() {
            let scatter = [0.003, -0.002, 0.001, -0.003][i % 4];
            let _ = writeln!(
                text,
                "{},{top},{bottom},{},pressure plate,{h},{:.5}",
                q(site),
                q(code),
                vg.value(*h, &LOAM) + scatter
            );
        }
    }
    text
}

/// Parse CSV text into rows of cells (header first).
fn cells(text: &str) -> Vec<Vec<String>> {
    csv::ReaderBuilder::new()
        .has_headers(false)
        .from_reader(text.as_bytes())
        .records()
        .map(|r| r.expect("csv record").iter().map(str::to_string).collect())
        .collect()
}

/// Require that no cell of a CSV text starts a formula, unless it is a plain number.
fn assert_no_formula(what: &str, text: &str) {
    for row in cells(text) {
        for cell in row {
            let number = cell.parse::<f64>().is_ok_and(f64::is_finite);
            assert!(
                number || !cell.starts_with(FORMULA_START),
                "{what}: the cell {cell:?} starts a formula in\n{text}"
            );
        }
    }
}

/// The cell a payload must become: a leading apostrophe, control characters shown escaped.
fn neutralised(payload: &str) -> String {
    let shown = payload.replace('\t', "\\u{9}").replace('\r', "\\u{d}");
    format!("'{shown}")
}

/// The column `name` of the CSV `text`, every row.
fn column(text: &str, name: &str) -> Vec<String> {
    let rows = cells(text);
    let i = rows[0]
        .iter()
        .position(|c| c == name)
        .unwrap_or_else(|| panic!("no column {name} in {:?}", rows[0]));
    rows[1..].iter().map(|r| r[i].clone()).collect()
}

/// A campaign whose site name, horizons and sample codes carry every payload; the four
/// that a file can hold are imported, tab and carriage return (which imports trim from a
/// cell's ends) are written into the file as an older porewise or another program could.
fn formula_campaign() -> Scratch {
    let s = Scratch::new();
    let sites = s.write(
        "sites.csv",
        &format!(
            "site,name,latitude,longitude\n@LAB,{},-33.5,-70.25\n",
            q(PAYLOADS[0])
        ),
    );
    s.import_ok("sites", &[&sites]);
    let mut layers = String::from("site,top_cm,bottom_cm,horizon\n");
    let mut samples = Vec::new();
    let codes = [
        PAYLOADS[0],
        PAYLOADS[1],
        PAYLOADS[2],
        PAYLOADS[3],
        "S5",
        "S6",
    ];
    for (i, payload) in PAYLOADS.iter().enumerate() {
        let horizon = if i < 4 { q(payload) } else { format!("H{i}") };
        let top = 10.0 * i as f64;
        let _ = writeln!(layers, "@LAB,{top},{},{horizon}", top + 10.0);
        samples.push(("@LAB", top, top + 10.0, codes[i]));
    }
    let layers = s.write("layers.csv", &layers);
    s.import_ok("layers", &[&layers]);
    let lab = s.write("lab.csv", &lab_rows(&samples));
    s.import_ok("lab", &[&lab]);
    let conn = s.connect();
    for (i, payload) in PAYLOADS.iter().enumerate().skip(4) {
        conn.execute(
            "UPDATE layer SET horizon = ?1 WHERE horizon = ?2",
            rusqlite::params![payload, format!("H{i}")],
        )
        .expect("horizon");
        conn.execute(
            "UPDATE sample SET code = ?1 WHERE code = ?2",
            rusqlite::params![payload, format!("S{}", i + 1)],
        )
        .expect("sample code");
    }
    porewise().arg("fit").arg(&s.db).assert().success();
    s
}

#[test]
fn listings_in_csv_neutralise_every_formula_payload() {
    let s = formula_campaign();
    let sites = s.list(&["sites", "--format", "csv"]);
    assert_no_formula("list sites", &sites);
    assert_eq!(column(&sites, "site"), vec!["'@LAB"]);
    assert_eq!(column(&sites, "name"), vec![neutralised(PAYLOADS[0])]);
    // Numbers are never touched: a negative latitude stays a number, unquoted.
    assert_eq!(column(&sites, "latitude_deg"), vec!["-33.5"]);
    assert!(sites.contains(",-33.5,-70.25,"), "{sites}");
    // The neutralised cell is quoted as well.
    assert!(
        sites.contains("\"'=HYPERLINK(\"\"http://example.invalid/\"\",\"\"open\"\")\""),
        "{sites}"
    );
    let layers = s.list(&["layers", "--format", "csv"]);
    assert_no_formula("list layers", &layers);
    let horizons = column(&layers, "horizon");
    for payload in PAYLOADS {
        assert!(
            horizons.contains(&neutralised(payload)),
            "{payload:?} in {horizons:?}"
        );
    }
    assert!(column(&layers, "layer").contains(&"'@LAB:0-10".to_string()));
    let samples = s.list(&["samples", "--format", "csv"]);
    assert_no_formula("list samples", &samples);
    let codes = column(&samples, "sample");
    for payload in PAYLOADS {
        assert!(
            codes.contains(&neutralised(payload)),
            "{payload:?} in {codes:?}"
        );
    }
    for what in ["readings", "fits", "profiles"] {
        let text = s.list(&[what, "--format", "csv"]);
        assert_no_formula(what, &text);
        assert!(text.contains("'@LAB"), "{what}: {text}");
    }
    // The JSON listing carries the text as stored (JSON strings are never formulas).
    let json: serde_json::Value =
        serde_json::from_str(&s.list(&["sites", "--format", "json"])).expect("json");
    assert_eq!(json[0]["name"], PAYLOADS[0]);
}

#[test]
fn the_exported_tables_neutralise_every_formula_payload() {
    let s = formula_campaign();
    let out = s.dir.path().join("out");
    porewise()
        .arg("export")
        .arg(&s.db)
        .arg("--to")
        .arg(&out)
        .args(["--format", "csv"])
        .assert()
        .success();
    let read = |name: &str| std::fs::read_to_string(out.join(name)).expect("export file");
    let parameters = read("parameters.csv");
    assert_no_formula("parameters.csv", &parameters);
    let samples = column(&parameters, "sample");
    let horizons = column(&parameters, "horizon");
    for payload in PAYLOADS {
        assert!(samples.contains(&neutralised(payload)), "{payload:?}");
        assert!(horizons.contains(&neutralised(payload)), "{payload:?}");
    }
    assert!(column(&parameters, "site").iter().all(|c| c == "'@LAB"));
    // Negative numbers stay numbers: AICc of a close fit is below zero.
    let aicc = column(&parameters, "aicc");
    assert!(
        aicc.iter()
            .any(|c| c.starts_with('-') && c.parse::<f64>().is_ok()),
        "{aicc:?}"
    );
    let profiles = read("profiles.csv");
    assert_no_formula("profiles.csv", &profiles);
    let horizons = column(&profiles, "horizon");
    for payload in PAYLOADS {
        assert!(horizons.contains(&neutralised(payload)), "{payload:?}");
    }
    assert!(column(&profiles, "layer").contains(&"'@LAB:0-10".to_string()));
}

#[test]
fn fits_of_a_plain_file_neutralise_sample_names() {
    let s = Scratch::new();
    // A file's cells are trimmed, so tab and carriage return cannot lead a name here.
    let vg = ModelKind::VanGenuchten.curve();
    let mut pairs = String::from("sample,suction_cm,theta\n");
    for name in &PAYLOADS[..4] {
        for (i, h) in SUCTIONS_CM.iter().enumerate() {
            let scatter = [0.003, -0.002, 0.001, -0.003][i % 4];
            let _ = writeln!(
                pairs,
                "{},{h},{:.5}",
                q(name),
                vg.value(*h, &LOAM) + scatter
            );
        }
    }
    let input = s.write("pairs.csv", &pairs);
    let out = s.dir.path().join("fits.csv");
    let assert = porewise()
        .args(["fit", "--input", &input, "--output"])
        .arg(&out)
        .assert()
        .success();
    assert!(stderr(&assert).is_empty(), "{}", stderr(&assert));
    let text = std::fs::read_to_string(&out).expect("fits.csv");
    assert_no_formula("fits.csv", &text);
    let names = column(&text, "sample");
    for payload in &PAYLOADS[..4] {
        assert!(
            names.contains(&neutralised(payload)),
            "{payload:?} in {names:?}"
        );
    }
    let aicc = column(&text, "aicc");
    assert!(aicc.iter().all(|c| c.starts_with('-')), "{aicc:?}");
    // The same on standard output.
    let assert = porewise()
        .args(["fit", "--input", &input])
        .assert()
        .success();
    assert_no_formula("fit stdout", &stdout(&assert));
}

/// Text that would clear the screen, retitle the terminal and ring its bell.
const ESCAPES: &str = "\u{1b}[2J\u{1b}]0;owned\u{7}Levee";
/// How [`ESCAPES`] must be shown.
const ESCAPES_SHOWN: &str = "\\u{1b}[2J\\u{1b}]0;owned\\u{7}Levee";
/// A horizon with a right-to-left override.
const RLO_HORIZON: &str = "A\u{202e}p";

fn no_hidden_controls(what: &str, text: &str) {
    let bad: Vec<char> = text
        .chars()
        .filter(|&c| {
            (c.is_control() && c != '\n')
                || matches!(c, '\u{202a}'..='\u{202e}' | '\u{2066}'..='\u{2069}')
        })
        .collect();
    assert!(bad.is_empty(), "{what} printed {bad:?}:\n{text}");
}

/// A campaign with a site name of terminal escapes and a horizon with a bidi override.
fn escape_campaign() -> Scratch {
    let s = Scratch::new();
    let sites = s.write(
        "sites.csv",
        &format!("site,name,latitude,longitude\nLV,{},1.5,2.5\n", q(ESCAPES)),
    );
    s.import_ok("sites", &[&sites]);
    let layers = s.write(
        "layers.csv",
        &format!("site,top_cm,bottom_cm,horizon\nLV,0,20,{RLO_HORIZON}\n"),
    );
    s.import_ok("layers", &[&layers]);
    let lab = s.write("lab.csv", &lab_rows(&[("LV", 0.0, 20.0, "LV-1")]));
    s.import_ok("lab", &[&lab]);
    s
}

#[test]
fn listings_show_control_characters_escaped() {
    let s = escape_campaign();
    for format in ["table", "csv"] {
        let sites = s.list(&["sites", "--format", format]);
        no_hidden_controls("list sites", &sites);
        assert!(sites.contains(ESCAPES_SHOWN), "{sites}");
        let layers = s.list(&["layers", "--format", format]);
        no_hidden_controls("list layers", &layers);
        assert!(layers.contains("A\\u{202e}p"), "{layers}");
    }
}

#[test]
fn fit_failure_lines_show_control_characters_escaped() {
    let s = escape_campaign();
    // An older porewise took any code; one too short to fit, named with escapes.
    let few = s.write(
        "few.csv",
        "site,top_cm,bottom_cm,sample,method,suction_cm,theta\n\
         LV,0,20,LV-few,plate,10,0.4\nLV,0,20,LV-few,plate,100,0.3\n",
    );
    s.import_ok("lab", &[&few]);
    s.connect()
        .execute(
            "UPDATE sample SET code = ?1 WHERE code = 'LV-few'",
            [format!("LV-{ESCAPES}")],
        )
        .expect("rename");
    let assert = porewise()
        .arg("fit")
        .arg(&s.db)
        .args(["--model", "van-genuchten"])
        .assert()
        .code(3);
    let err = stderr(&assert);
    no_hidden_controls("fit DB", &err);
    assert!(
        err.contains(&format!("sample LV-{ESCAPES_SHOWN}: not fitted")),
        "{err}"
    );
    no_hidden_controls("fit DB stdout", &stdout(&assert));
    // A plain file's names are shown the same way.
    let input = s.write(
        "pairs.csv",
        &format!(
            "sample,suction_cm,theta\n{0},10,0.4\n{0},100,0.3\n",
            q(ESCAPES)
        ),
    );
    let assert = porewise().args(["fit", "--input", &input]).assert().code(3);
    let err = stderr(&assert);
    no_hidden_controls("fit --input", &err);
    assert!(
        err.contains(&format!("sample {ESCAPES_SHOWN}: not fitted")),
        "{err}"
    );
}

#[test]
fn the_html_report_shows_control_characters_escaped_in_its_charts() {
    let s = escape_campaign();
    let conn = s.connect();
    conn.execute(
        "UPDATE layer SET horizon = ?1",
        [format!("{RLO_HORIZON}{ESCAPES}")],
    )
    .expect("horizon");
    porewise().arg("fit").arg(&s.db).assert().success();
    let out = s.dir.path().join("out");
    porewise()
        .arg("export")
        .arg(&s.db)
        .arg("--to")
        .arg(&out)
        .args(["--format", "html"])
        .assert()
        .success();
    let html = std::fs::read_to_string(out.join("report.html")).expect("report");
    no_hidden_controls("report.html", &html);
    let doc = roxmltree::Document::parse_with_options(
        &html,
        roxmltree::ParsingOptions {
            allow_dtd: true,
            ..roxmltree::ParsingOptions::default()
        },
    )
    .expect("the page, charts included, is well-formed XML");
    let legend = format!("A\\u{{202e}}p{ESCAPES_SHOWN} 0-20 cm");
    let in_svg_text = doc
        .descendants()
        .filter(|n| n.tag_name().name() == "text")
        .any(|n| n.text().is_some_and(|t| t.contains(&legend)));
    assert!(in_svg_text, "no chart text {legend:?}");
}

#[test]
fn the_terminal_ui_renders_bidi_controls_inert() {
    use porewise::tui::runtime::{Session, SessionOptions};
    use ratatui::Terminal;
    use ratatui::backend::TestBackend;
    use ratatui::crossterm::event::{KeyCode, KeyEvent, KeyModifiers};

    let s = escape_campaign();
    s.connect()
        .execute("UPDATE site SET name = ?1", ["\u{202e}Levee\u{2066}"])
        .expect("name");
    let mut session = Session::open(&s.db, SessionOptions::scripted(80, 24)).expect("opens");
    session.press(&KeyEvent::new(KeyCode::Enter, KeyModifiers::NONE));
    let mut terminal = Terminal::new(TestBackend::new(80, 24)).expect("terminal");
    session.draw(&mut terminal).expect("draws");
    let buffer = terminal.backend().buffer().clone();
    for cell in &buffer.content {
        no_hidden_controls("a cell of the screen", cell.symbol());
    }
    let rows: Vec<String> = (0..24u16)
        .map(|y| (0..80u16).map(|x| buffer[(x, y)].symbol()).collect())
        .collect();
    let text = rows.join("\n");
    assert!(text.contains("LV \\u{202e}Levee\\u{"), "{text}");
    assert!(text.contains("0-20 cm A\\u{202e}p"), "{text}");
    // The tree's right border stands in one column on every row of the pane, and every row
    // is as wide as the screen.
    let corner = rows[1].chars().position(|c| c == '╮').expect("tree corner");
    for row in &rows[2..21] {
        assert_eq!(row.chars().count(), 80, "{text}");
        assert_eq!(row.chars().nth(corner), Some('│'), "{text}");
    }
}

#[test]
fn measuring_days_other_than_iso_calendar_dates_are_refused() {
    let s = Scratch::new();
    let mut text =
        String::from("site,top_cm,bottom_cm,sample,method,suction_kpa,theta,measured_on\n");
    let days = [
        "-1-01-01",
        "26-6-3",
        "0-1-1",
        "+2026-06-03",
        "2026-6-3",
        "2026-02-30",
        "1799-12-31",
        "2201-01-01",
    ];
    for (i, day) in days.iter().enumerate() {
        let _ = writeln!(text, "LV,0,20,A1,plate,{},0.3,{day}", i + 1);
    }
    let _ = writeln!(text, "LV,0,20,A1,plate,100,0.2,2026-06-03");
    let file = s.write("days.csv", &text);
    let expected: Vec<String> = days
        .iter()
        .enumerate()
        .map(|(i, day)| {
            format!(
                "{file}:{}:measured_on: found {day:?}, expected a date as YYYY-MM-DD (ISO 8601, \
                 four-digit year from 1800 to 2200",
                i + 2
            )
        })
        .collect();
    let expected: Vec<&str> = expected.iter().map(String::as_str).collect();
    s.refused("lab", &[&file], &[], &expected, days.len());
    // The good rows alone go in.
    let good = s.write(
        "good.csv",
        "site,top_cm,bottom_cm,sample,method,suction_kpa,theta,measured_on\n\
         LV,0,20,A1,plate,100,0.2,2026-06-03\nLV,0,20,A1,plate,1800,0.1,1800-01-01\n",
    );
    s.import_ok("lab", &[&good]);
}

/// Store `-0001-01-01` as a measuring day, as porewise 0.1 did for `-1-01-01`.
fn poison(s: &Scratch) -> i64 {
    let conn = s.connect();
    let id: i64 = conn
        .query_row("SELECT min(id) FROM reading", [], |r| r.get(0))
        .expect("a reading");
    conn.execute(
        "UPDATE reading SET measured_at = '-0001-01-01' WHERE id = ?1",
        [id],
    )
    .expect("poison");
    id
}

#[test]
fn one_bad_stored_day_does_not_stop_listings_reviews_or_exports() {
    let s = Scratch::new();
    s.import_ok("lab", &["valid/lab_kpa.csv"]);
    let id = poison(&s);
    let warning = format!(
        "warning: reading {id} (sample \"LV-A1\"): the stored measured_on \"-0001-01-01\" is not \
         a calendar day (YYYY-MM-DD); it is left empty"
    );
    let assert = porewise()
        .arg("list")
        .arg(&s.db)
        .args(["readings", "--format", "csv"])
        .assert()
        .success();
    assert!(stderr(&assert).contains(&warning), "{}", stderr(&assert));
    let out = stdout(&assert);
    let ids = column(&out, "reading");
    let days = column(&out, "measured_on");
    let at = ids.iter().position(|r| *r == id.to_string()).expect("row");
    assert_eq!(days[at], "");
    assert_eq!(ids.len(), 9, "every reading is listed");
    let assert = porewise().arg("review").arg(&s.db).assert().success();
    assert!(stderr(&assert).contains(&warning), "{}", stderr(&assert));
    let out = s.dir.path().join("out");
    let assert = porewise()
        .arg("export")
        .arg(&s.db)
        .arg("--to")
        .arg(&out)
        .assert()
        .success();
    assert!(stderr(&assert).contains(&warning), "{}", stderr(&assert));
    let json = std::fs::read_to_string(out.join("campaign.json")).expect("json");
    assert!(json.contains("LV-A1"), "the sample is exported");
    // The reading can still be flagged and taken back.
    porewise()
        .arg("flag")
        .arg(&s.db)
        .arg(id.to_string())
        .args(["--reason", "day unreadable"])
        .assert()
        .success();
    porewise()
        .arg("unflag")
        .arg(&s.db)
        .arg(id.to_string())
        .assert()
        .success();
}

/// Rewrite the campaign at `db` as schema version `version` left it: a fresh file with the
/// first `version` migrations, every table of that schema filled with the same rows (the
/// columns that version has), so that opening it runs the later migrations for real.
fn downgrade(db: &std::path::Path, version: usize) {
    let old = db.with_extension("old.sqlite");
    let conn = rusqlite::Connection::open(&old).expect("old file");
    for sql in &porewise::store::migrate::MIGRATIONS[..version] {
        conn.execute_batch(sql).expect("older migration");
    }
    conn.pragma_update(None, "user_version", version as i64)
        .expect("version");
    conn.execute("ATTACH DATABASE ?1 AS cur", [db.display().to_string()])
        .expect("attach");
    let tables: Vec<String> = conn
        .prepare(
            "SELECT name FROM main.sqlite_schema WHERE type = 'table' AND name NOT LIKE 'sqlite_%'",
        )
        .expect("tables")
        .query_map([], |r| r.get(0))
        .expect("tables")
        .collect::<Result<_, _>>()
        .expect("tables");
    for table in tables {
        let columns: Vec<String> = conn
            .prepare(&format!(
                "SELECT name FROM pragma_table_info('{table}', 'main')"
            ))
            .expect("columns")
            .query_map([], |r| r.get(0))
            .expect("columns")
            .collect::<Result<_, _>>()
            .expect("columns");
        let list = columns.join(", ");
        // Logger records before version 11 had the columns the view of version 11 shows.
        let from = if table == "logger_record" && version < 11 {
            "cur.logger_view ORDER BY id".to_string()
        } else {
            format!("cur.{table} ORDER BY rowid")
        };
        conn.execute(
            &format!("INSERT INTO main.{table} ({list}) SELECT {list} FROM {from}"),
            [],
        )
        .expect("copy");
    }
    conn.execute("DETACH DATABASE cur", []).expect("detach");
    drop(conn);
    for suffix in ["-wal", "-shm"] {
        let _ = std::fs::remove_file(format!("{}{suffix}", db.display()));
    }
    std::fs::rename(&old, db).expect("replace");
}

#[test]
fn a_migration_moves_stored_days_out_of_range_into_the_notes() {
    let s = Scratch::new();
    s.import_ok("lab", &["valid/lab_kpa.csv"]);
    porewise()
        .arg("fit")
        .arg(&s.db)
        .args(["--sample", "LV-A1"])
        .assert()
        .success();
    let conn = s.connect();
    // The first four readings are LV-A1's (file order).
    let ids: Vec<i64> = conn
        .prepare("SELECT id FROM reading ORDER BY id LIMIT 4")
        .expect("prepare")
        .query_map([], |r| r.get(0))
        .expect("ids")
        .collect::<Result<_, _>>()
        .expect("ids");
    for (id, day, notes) in [
        (ids[0], "-0001-01-01", None),
        (ids[1], "0026-06-03", Some("plate 3")),
        (ids[2], "2026-06-03", None),
        (ids[3], "0000-01-01", None),
    ] {
        conn.execute(
            "UPDATE reading SET measured_at = ?2, notes = ?3 WHERE id = ?1",
            rusqlite::params![id, day, notes],
        )
        .expect("old value");
    }
    // The file as an older porewise left it: schema version 6.
    drop(conn);
    downgrade(&s.db, 6);
    let assert = porewise()
        .arg("list")
        .arg(&s.db)
        .args(["readings"])
        .assert()
        .success();
    assert!(!stderr(&assert).contains("warning"), "{}", stderr(&assert));
    let conn = s.connect();
    let row = |id: i64| -> (Option<String>, Option<String>) {
        conn.query_row(
            "SELECT measured_at, notes FROM reading WHERE id = ?1",
            [id],
            |r| Ok((r.get(0)?, r.get(1)?)),
        )
        .expect("row")
    };
    assert_eq!(
        row(ids[0]),
        (None, Some("measured_on as imported: -0001-01-01".into()))
    );
    assert_eq!(
        row(ids[1]),
        (
            None,
            Some("plate 3; measured_on as imported: 0026-06-03".into())
        )
    );
    assert_eq!(row(ids[2]), (Some("2026-06-03".into()), None));
    assert_eq!(
        row(ids[3]),
        (None, Some("measured_on as imported: 0000-01-01".into()))
    );
    let version: i64 = conn
        .pragma_query_value(None, "user_version", |r| r.get(0))
        .expect("version");
    assert_eq!(version, porewise::store::migrate::latest_version());
    // The repair changed no value a fit used: the fits are still current.
    let fits = s.list(&["fits", "--sample", "LV-A1", "--format", "csv"]);
    assert_eq!(column(&fits, "state"), vec!["current"], "{fits}");
}

#[test]
fn depths_beyond_the_bounds_are_refused() {
    let s = Scratch::new();
    let layers = s.write(
        "layers.csv",
        "site,top_cm,bottom_cm\nLV,0,1e308\nLV,1e-300,20\nLV,20,10000.5\nLV,0.005,30\n\
         LV,40,10000\n",
    );
    let expected = "a depth below the surface of 0 or from 0.01 to 10000 cm (100 m)";
    s.refused(
        "layers",
        &[&layers],
        &[],
        &[
            &format!("{layers}:2:bottom_cm: found \"1e308\", expected {expected}"),
            &format!("{layers}:3:top_cm: found \"1e-300\", expected {expected}"),
            &format!("{layers}:4:bottom_cm: found \"10000.5\", expected {expected}"),
            &format!("{layers}:5:top_cm: found \"0.005\", expected {expected}"),
        ],
        4,
    );
    let lab = s.write(
        "lab.csv",
        "site,top_cm,bottom_cm,sample,method,suction_kpa,theta\nLV,1e-300,1e308,A1,plate,1,0.3\n",
    );
    s.refused(
        "lab",
        &[&lab],
        &[],
        &[
            &format!("{lab}:2:top_cm: found \"1e-300\", expected {expected}"),
            &format!("{lab}:2:bottom_cm: found \"1e308\", expected {expected}"),
        ],
        2,
    );
    let logger = s.write(
        "logger.csv",
        "site,depth_cm,sensor,sensor_id,time,value,unit\n\
         LV,1e308,tensiometer,T1,2026-05-01T00:00:00Z,10,kPa\n\
         LV,1e-300,tensiometer,T2,2026-05-01T00:00:00Z,10,kPa\n",
    );
    s.refused(
        "logger",
        &[&logger],
        &[],
        &[
            &format!("{logger}:2:depth_cm: found \"1e308\", expected {expected}"),
            &format!("{logger}:3:depth_cm: found \"1e-300\", expected {expected}"),
        ],
        2,
    );
    // The bounds themselves are depths.
    let edge = s.write(
        "edge.csv",
        "site,top_cm,bottom_cm\nLV,0,0.01\nLV,9999,10000\n",
    );
    s.import_ok("layers", &[&edge]);
}

#[test]
fn control_characters_in_codes_are_refused_at_their_cell() {
    let s = Scratch::new();
    let lab = s.write(
        "lab.csv",
        "site,top_cm,bottom_cm,sample,method,suction_kpa,theta\n\
         LV,0,20,\0A1,plate,1,0.3\n\
         L\u{1b}V,0,20,A2,plate,1,0.3\n\
         LV,0,20,A\u{202e}3,plate,1,0.3\n",
    );
    s.refused(
        "lab",
        &[&lab],
        &[],
        &[
            &format!(
                "{lab}:2:sample: found \"\\0A1\", expected a sample code of printable \
                 characters (it holds the control character U+0000)"
            ),
            &format!("{lab}:3:site: found \"L\\u{{1b}}V\", expected a site code of printable"),
            &format!("{lab}:4:sample: found \"A\\u{{202e}}3\", expected a sample code"),
        ],
        3,
    );
    let sites = s.write(
        "sites.csv",
        "site,name,latitude,longitude\n\u{0}LV,Levee,1,2\n",
    );
    s.refused(
        "sites",
        &[&sites],
        &[],
        &[&format!(
            "{sites}:2:site: found \"\\0LV\", expected a site code of printable"
        )],
        1,
    );
    let logger = s.write(
        "logger.csv",
        "site,depth_cm,sensor,sensor_id,time,value,unit\n\
         LV,30,tensiometer,\u{7}T1,2026-05-01T00:00:00Z,10,kPa\n",
    );
    s.refused(
        "logger",
        &[&logger],
        &[],
        &[&format!(
            "{logger}:2:sensor_id: found \"\\u{{7}}T1\", expected a sensor id of printable"
        )],
        1,
    );
}

#[test]
fn columns_not_read_are_named_with_a_suggestion_and_refused_when_strict() {
    let s = Scratch::new();
    let layers = s.write(
        "layers.csv",
        "site,top_cm,bottom_cm,bulk_density_kg_m3,colour,\nLV,0,20,1450,brown,\n",
    );
    let assert = s.import("layers", &[&layers], &[]).success();
    let err = stderr(&assert);
    assert!(
        err.contains(&format!(
            "{layers}:1:bulk_density_kg_m3: warning: found the column \"bulk_density_kg_m3\", \
             which porewise does not read (did you mean \"bulk_density_g_cm3\"?); its values \
             are ignored"
        )),
        "{err}"
    );
    assert!(
        err.contains(&format!(
            "{layers}:1:colour: warning: found the column \"colour\", which porewise does not \
             read; its values are ignored"
        )),
        "{err}"
    );
    assert!(
        err.contains(&format!(
            "{layers}:1:-: warning: found column 6 without a name; its values are ignored"
        )),
        "{err}"
    );
    assert_eq!(err.lines().count(), 3, "{err}");
    assert!(stdout(&assert).contains("added 1 site, 1 layer"));
    // --strict refuses the file and writes nothing.
    let again = s.write(
        "layers2.csv",
        "site,top_cm,bottom_cm,bulk_density_kg_m3\nLV,20,40,1450\n",
    );
    s.refused(
        "layers",
        &[&again],
        &["--strict"],
        &[&format!(
            "{again}:1:bulk_density_kg_m3: found the column \"bulk_density_kg_m3\", which \
             porewise does not read (did you mean \"bulk_density_g_cm3\"?), expected only the \
             columns site,top_cm,bottom_cm["
        )],
        1,
    );
    // Lab, sites and logger files alike; a unit-less name points at the column it begins.
    let lab = s.write(
        "lab.csv",
        "site,top_cm,bottom_cm,sample,method,suction_kpa,theta,mesured_on,operator\n\
         LV,0,20,A1,plate,1,0.3,2026-06-03,kim\n",
    );
    let err = stderr(&s.import("lab", &[&lab], &[]).success());
    assert!(err.contains("(did you mean \"measured_on\"?)"), "{err}");
    assert!(
        err.contains("\"operator\", which porewise does not read;"),
        "{err}"
    );
    let sites = s.write(
        "sites.csv",
        "site,name,latitude,longitude,elevation\nLV,Levee,1,2,14\n",
    );
    let err = stderr(&s.import("sites", &[&sites], &[]).success());
    assert!(err.contains("(did you mean \"elevation_m\"?)"), "{err}");
    let logger = s.write(
        "logger.csv",
        "site,depth,depth_cm,sensor,sensor_id,time,value,unit\n\
         LV,30,30,tensiometer,T1,2026-05-01T00:00:00Z,10,kPa\n",
    );
    let err = stderr(&s.import("logger", &[&logger], &[]).success());
    assert!(
        err.contains(&format!(
            "{logger}:1:depth: warning: found the column \"depth\", which porewise does not \
             read (did you mean \"depth_cm\"?)"
        )),
        "{err}"
    );
    let logger2 = s.write(
        "logger2.csv",
        "site,depth,depth_cm,sensor,sensor_id,time,value,unit\n\
         LV,30,30,tensiometer,T1,2026-05-02T00:00:00Z,10,kPa\n",
    );
    s.refused("logger", &[&logger2], &["--strict"], &["(--strict)"], 1);
    // A file with only known columns says nothing on stderr.
    let assert = s.import("layers", &["valid/layers.csv"], &[]).success();
    assert!(stderr(&assert).is_empty(), "{}", stderr(&assert));
}

#[test]
fn overlapping_layers_are_refused_unless_allowed() {
    let s = Scratch::new();
    let layers = s.write(
        "layers.csv",
        "site,top_cm,bottom_cm,horizon\nLV,0,30,A\nLV,20,50,B\nLV,50,70,C\n",
    );
    s.refused(
        "layers",
        &[&layers],
        &[],
        &[&format!(
            "{layers}:3:top_cm: found layer LV:20-50, which overlaps layer LV:0-30 (at \
             {layers}:2); expected layers of one site that do not overlap (--allow-overlap"
        )],
        1,
    );
    s.import_ok("layers", &["valid/layers.csv"]);
    // A lab file creates layers on first sight: 0-25 beside the stored 0-20 is refused.
    let lab = s.write(
        "lab.csv",
        "site,top_cm,bottom_cm,sample,method,suction_kpa,theta\nLV,0,25,A9,plate,1,0.3\n",
    );
    s.refused(
        "lab",
        &[&lab],
        &[],
        &[&format!(
            "{lab}:2:top_cm: found layer LV:0-25, which overlaps layer LV:0-20 that the \
             campaign holds"
        )],
        1,
    );
    // Nested on purpose, both go in.
    let out = stdout(&s.import("lab", &[&lab], &["--allow-overlap"]).success());
    assert!(out.contains("1 layer"), "{out}");
    let out = stdout(
        &s.import("layers", &[&layers], &["--allow-overlap"])
            .success(),
    );
    assert!(out.contains("3 layers"), "{out}");
}
