//! `import lab|sites|layers` on spreadsheet workbooks (.xlsx, .ods) the tests write
//! themselves: the sheet chosen, numbers and dates as cells, errors naming the cell
//! (`lab.xlsx:Plates!G14`), all or nothing, re-import refusal by content and sheet.

mod common;

use std::fmt::Write as _;
use std::io::Write as _;

use common::{Scratch, stderr, stdout};
use rust_xlsxwriter::{ExcelDateTime, Format, Workbook};

/// A cell to write: text, number or date (written as a date cell).
#[derive(Clone, Copy)]
enum Cell<'a> {
    T(&'a str),
    N(f64),
    D(u16, u8, u8),
    Blank,
}
use Cell::{Blank, D, N, T};

/// Write an .xlsx workbook of `sheets` (name, rows) into the scratch folder.
fn xlsx(s: &Scratch, file: &str, sheets: &[(&str, Vec<Vec<Cell<'_>>>)]) -> String {
    let mut book = Workbook::new();
    let date = Format::new().set_num_format("yyyy-mm-dd");
    for (name, rows) in sheets {
        let sheet = book.add_worksheet();
        sheet.set_name(*name).expect("sheet name");
        for (r, row) in rows.iter().enumerate() {
            for (c, cell) in row.iter().enumerate() {
                let (r, c) = (r as u32, c as u16);
                match *cell {
                    T(t) => {
                        sheet.write_string(r, c, t).expect("text");
                    }
                    N(v) => {
                        sheet.write_number(r, c, v).expect("number");
                    }
                    D(y, m, d) => {
                        let day = ExcelDateTime::from_ymd(y, m, d).expect("day");
                        sheet
                            .write_datetime_with_format(r, c, &day, &date)
                            .expect("date");
                    }
                    Blank => {}
                }
            }
        }
    }
    let path = s.dir.path().join(file);
    book.save(&path).expect("save workbook");
    path.display().to_string()
}

/// Write an .ods workbook (OpenDocument spreadsheet, the minimum a reader needs) of one
/// sheet into the scratch folder.
fn ods(s: &Scratch, file: &str, sheet: &str, rows: &[Vec<Cell<'_>>]) -> String {
    let mut table = String::new();
    for row in rows {
        table.push_str("<table:table-row>");
        for cell in row {
            match *cell {
                T(t) => write!(
                    table,
                    "<table:table-cell office:value-type=\"string\"><text:p>{t}</text:p></table:table-cell>"
                )
                .expect("text"),
                N(v) => write!(
                    table,
                    "<table:table-cell office:value-type=\"float\" office:value=\"{v}\"><text:p>{v}</text:p></table:table-cell>"
                )
                .expect("text"),
                D(y, m, d) => write!(
                    table,
                    "<table:table-cell office:value-type=\"date\" office:date-value=\"{y:04}-{m:02}-{d:02}\"><text:p>{d:02}.{m:02}.{y}</text:p></table:table-cell>"
                )
                .expect("text"),
                Blank => table.push_str("<table:table-cell/>"),
            }
        }
        table.push_str("</table:table-row>");
    }
    let content = format!(
        "<?xml version=\"1.0\" encoding=\"UTF-8\"?>\
         <office:document-content xmlns:office=\"urn:oasis:names:tc:opendocument:xmlns:office:1.0\" \
         xmlns:table=\"urn:oasis:names:tc:opendocument:xmlns:table:1.0\" \
         xmlns:text=\"urn:oasis:names:tc:opendocument:xmlns:text:1.0\" office:version=\"1.2\">\
         <office:body><office:spreadsheet><table:table table:name=\"{sheet}\">{table}</table:table>\
         </office:spreadsheet></office:body></office:document-content>"
    );
    let manifest = "<?xml version=\"1.0\" encoding=\"UTF-8\"?>\
         <manifest:manifest xmlns:manifest=\"urn:oasis:names:tc:opendocument:xmlns:manifest:1.0\" manifest:version=\"1.2\">\
         <manifest:file-entry manifest:full-path=\"/\" manifest:media-type=\"application/vnd.oasis.opendocument.spreadsheet\"/>\
         <manifest:file-entry manifest:full-path=\"content.xml\" manifest:media-type=\"text/xml\"/>\
         </manifest:manifest>";
    let path = s.dir.path().join(file);
    let mut zip = zip::ZipWriter::new(std::fs::File::create(&path).expect("create"));
    let stored =
        zip::write::SimpleFileOptions::default().compression_method(zip::CompressionMethod::Stored);
    zip.start_file("mimetype", stored).expect("entry");
    zip.write_all(b"application/vnd.oasis.opendocument.spreadsheet")
        .expect("write");
    zip.start_file("META-INF/manifest.xml", stored)
        .expect("entry");
    zip.write_all(manifest.as_bytes()).expect("write");
    zip.start_file("content.xml", stored).expect("entry");
    zip.write_all(content.as_bytes()).expect("write");
    zip.finish().expect("finish");
    path.display().to_string()
}

const LAB_HEADER: [&str; 8] = [
    "site",
    "top_cm",
    "bottom_cm",
    "sample",
    "method",
    "suction_kpa",
    "theta",
    "measured_on",
];

fn header() -> Vec<Cell<'static>> {
    LAB_HEADER.iter().map(|h| T(h)).collect()
}

/// Twelve readings of three invented samples (four suctions each), measured on 2026-06-03
/// (a date cell).
fn lab_rows() -> Vec<Vec<Cell<'static>>> {
    let mut rows = vec![header()];
    for (sample, top, bottom) in [
        ("WB-1", 0.0, 20.0),
        ("WB-2", 0.0, 20.0),
        ("WB-3", 20.0, 40.0),
    ] {
        for (kpa, theta) in [(0.0, 0.41), (10.0, 0.33), (33.0, 0.27), (1500.0, 0.11)] {
            rows.push(vec![
                T("WBS"),
                N(top),
                N(bottom),
                T(sample),
                T("pressure plate"),
                N(kpa),
                N(theta),
                D(2026, 6, 3),
            ]);
        }
    }
    rows
}

/// The same readings as a CSV file.
fn lab_csv(s: &Scratch) -> String {
    let mut text = LAB_HEADER.join(",") + "\n";
    for (sample, top, bottom) in [("WB-1", 0, 20), ("WB-2", 0, 20), ("WB-3", 20, 40)] {
        for (kpa, theta) in [(0, 0.41), (10, 0.33), (33, 0.27), (1500, 0.11)] {
            writeln!(
                text,
                "WBS,{top},{bottom},{sample},pressure plate,{kpa},{theta},2026-06-03"
            )
            .expect("text");
        }
    }
    s.write("lab.csv", &text)
}

/// The stored readings (sample, h in cm, theta, day) in order.
fn readings(s: &Scratch) -> Vec<(String, f64, f64, Option<String>)> {
    let conn = s.connect();
    let mut stmt = conn
        .prepare(
            "SELECT s.code, r.h_cm, r.theta, r.measured_at FROM reading r \
             JOIN sample s ON s.id = r.sample_id ORDER BY s.code, r.h_cm",
        )
        .expect("prepare");
    stmt.query_map([], |r| Ok((r.get(0)?, r.get(1)?, r.get(2)?, r.get(3)?)))
        .expect("query")
        .collect::<Result<_, _>>()
        .expect("rows")
}

#[test]
fn an_xlsx_lab_sheet_imports_to_the_same_values_as_its_csv() {
    let s = Scratch::new();
    let notes = vec![
        vec![T("Invented lab sheet for the test")],
        vec![T("no table here")],
    ];
    let book = xlsx(&s, "lab.xlsx", &[("Notes", notes), ("Plates", lab_rows())]);
    let out = s.import("lab", &[&book], &[]).success();
    assert!(
        stdout(&out).contains("added 1 site, 2 layers, 3 samples, 12 readings from 1 file"),
        "{}",
        stdout(&out)
    );
    let from_book = readings(&s);
    assert_eq!(from_book.len(), 12);
    assert_eq!(from_book[0].3.as_deref(), Some("2026-06-03"));

    let t = Scratch::new();
    let csv = lab_csv(&t);
    t.import("lab", &[&csv], &[]).success();
    // Bit for bit: the workbook's numbers go through the same decimal conversion as the CSV.
    assert_eq!(from_book, readings(&t));

    // The batch records the sheet read.
    let name: String = s
        .connect()
        .query_row("SELECT file_name FROM import_batch", [], |r| r.get(0))
        .expect("batch");
    assert!(name.ends_with("lab.xlsx:Plates"), "{name}");
}

#[test]
fn a_bad_cell_is_named_by_sheet_and_cell_and_nothing_is_written() {
    let s = Scratch::new();
    let mut rows = lab_rows();
    rows[12][6] = T("x"); // row 13 of the sheet, theta in column G
    rows[5][5] = N(-5.0); // row 6, suction_kpa in column F
    let book = xlsx(&s, "lab.xlsx", &[("Plates", rows)]);
    s.refused(
        "lab",
        &[&book],
        &[],
        &[
            "lab.xlsx:Plates!G13: found \"x\", expected a number",
            "lab.xlsx:Plates!F6: found \"-5\", expected a suction of 0 or more",
        ],
        2,
    );
}

#[test]
fn a_header_below_title_rows_and_problems_in_it_point_at_its_row() {
    let s = Scratch::new();
    let mut rows = vec![vec![T("Plate results, invented")], vec![]];
    rows.extend(lab_rows());
    let book = xlsx(&s, "lab.xlsx", &[("Lab results", rows.clone())]);
    s.import("lab", &[&book], &["--dry-run"]).success();

    // A misspelt column: the header row is found only when the sheet is named.
    rows[2][3] = T("sampel");
    let bad = xlsx(&s, "bad.xlsx", &[("Lab results", rows)]);
    s.refused(
        "lab",
        &[&bad],
        &[],
        &[
            "bad.xlsx: found no sheet with the columns site, top_cm, bottom_cm, sample, method \
           in a header row (sheets: \"Lab results\")",
        ],
        1,
    );
    // Named, the first non-empty row is taken for the header; its problems name its cells.
    let out = s
        .import("lab", &[&bad], &["--sheet", "Plate results"])
        .code(1);
    assert!(
        stderr(&out).contains(
            "bad.xlsx: found no sheet named \"Plate results\", expected one of \"Lab results\""
        ),
        "{}",
        stderr(&out)
    );
}

#[test]
fn a_named_sheet_without_a_column_names_the_header_row() {
    let s = Scratch::new();
    let mut rows = lab_rows();
    rows[0][3] = T("sampel");
    let book = xlsx(&s, "lab.xlsx", &[("Plates", rows)]);
    s.refused(
        "lab",
        &[&book],
        &["--sheet", "Plates"],
        &["lab.xlsx:Plates!1:1: found no column \"sample\" in the header"],
        1,
    );
}

#[test]
fn reimport_is_refused_per_sheet_and_text_dates_and_cells_outside_are_checked() {
    let s = Scratch::new();
    let mut second = vec![header()];
    second.push(vec![
        T("WBS"),
        N(40.0),
        N(60.0),
        T("WB-9"),
        T("dewpoint"),
        N(5000.0),
        N(0.05),
        T("2026-06-04"),
    ]);
    let book = xlsx(
        &s,
        "lab.xlsx",
        &[("Plates", lab_rows()), ("Dewpoint", second)],
    );
    s.import_ok("lab", &[&book]);
    let again = s.import("lab", &[&book], &[]).code(1);
    assert!(
        stderr(&again).contains("this content was already imported on"),
        "{}",
        stderr(&again)
    );
    s.import("lab", &[&book], &["--sheet", "Dewpoint"])
        .success();
    assert_eq!(s.count("reading"), 13);
    let day: String = s
        .connect()
        .query_row(
            "SELECT measured_at FROM reading WHERE h_cm > 50000",
            [],
            |r| r.get(0),
        )
        .expect("day");
    assert_eq!(day, "2026-06-04");

    let t = Scratch::new();
    let mut rows = lab_rows();
    rows[3].push(Blank);
    rows[3].push(T("see note"));
    rows[7][7] = T("3.6.2026");
    rows[8][6] = D(2026, 6, 3);
    let bad = xlsx(&t, "lab.xlsx", &[("Plates", rows)]);
    t.refused(
        "lab",
        &[&bad],
        &[],
        &[
            "lab.xlsx:Plates!4:4: found \"see note\" in Plates!J4, outside the header's columns \
             A to H",
            "lab.xlsx:Plates!H8: found \"3.6.2026\", expected a date as YYYY-MM-DD",
            "lab.xlsx:Plates!G9: found \"2026-06-03\", expected a number",
        ],
        3,
    );
}

#[test]
fn ods_sheets_read_like_xlsx() {
    let s = Scratch::new();
    let book = ods(&s, "lab.ods", "Plates", &lab_rows());
    s.import_ok("lab", &[&book]);
    let t = Scratch::new();
    let csv = lab_csv(&t);
    t.import_ok("lab", &[&csv]);
    assert_eq!(readings(&s), readings(&t));

    let mut rows = lab_rows();
    rows[2][1] = T("ten");
    let u = Scratch::new();
    let bad = ods(&u, "bad.ods", "Plates", &rows);
    u.refused(
        "lab",
        &[&bad],
        &[],
        &["bad.ods:Plates!B3: found \"ten\", expected a number"],
        1,
    );
}

#[test]
fn sites_and_layers_workbooks_and_files_that_are_not_workbooks() {
    let s = Scratch::new();
    let sites = vec![
        ["site", "name", "latitude", "longitude"].map(T).to_vec(),
        vec![T("WBS"), T("Invented plot"), N(46.1), N(8.2)],
    ];
    let book = xlsx(&s, "sites.xlsx", &[("Sites", sites)]);
    s.import_ok("sites", &[&book]);
    let layers = vec![
        ["site", "top_cm", "bottom_cm", "horizon", "ks_cm_per_day"]
            .map(T)
            .to_vec(),
        vec![T("WBS"), N(0.0), N(20.0), T("Ap"), N(35.5)],
        vec![T("WBS"), N(20.0), N(10.0), T("Bw"), Blank],
    ];
    let book = xlsx(&s, "layers.xlsx", &[("Layers", layers)]);
    s.refused(
        "layers",
        &[&book],
        &[],
        &["layers.xlsx:Layers!C3: found \"10\", expected a bottom deeper than top_cm 20"],
        1,
    );
    let fake = s.write("fake.xlsx", "site,name\nA,B\n");
    s.refused(
        "layers",
        &[&fake],
        &[],
        &["fake.xlsx: cannot read the file as an .xlsx workbook"],
        1,
    );
}
