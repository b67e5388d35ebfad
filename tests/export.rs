//! The campaign summary export: every file parses back (CSV, JSON, RFC 7946 GeoJSON, the HTML
//! page and its SVG charts as XML), the numbers equal the stored fits, user text is escaped,
//! two exports are identical but for the export time, the demo campaign exports every sample,
//! and the target folder is handled as documented.

#![allow(clippy::float_cmp)]

mod common;

use std::collections::{BTreeMap, BTreeSet};
use std::fmt::Write as _;
use std::path::{Path, PathBuf};

use chrono::TimeZone;
use common::{porewise, stderr};
use porewise::analysis::{ModelChoice, fit_campaign, profiles, sample_fits};
use porewise::fit::FitOptions;
use porewise::import::{ImportKind, ImportOptions, Source, import_sources};
use porewise::model::domain::FlagTarget;
use porewise::model::retention::ModelKind;
use porewise::report::export::schema::{CampaignDocument, FORMAT, SCHEMA_VERSION, fingerprint};
use porewise::report::export::{
    ALL_FILES, CAMPAIGN_FILE, ExportFormat, ExportOptions, PARAMETERS_FILE, PROFILES_FILE,
    REPORT_FILE, SITES_FILE, build_export, export_campaign,
};
use porewise::store::Campaign;
use porewise::store::fits::{self, FitState, Selection};
use porewise::store::flags::{self, Suggestion};
use tempfile::TempDir;

/// The site name that must stay text everywhere.
const SCRIPT_NAME: &str = "<script>alert(1)</script>";
/// A site note with an ampersand and both kinds of quotes.
const NOTE: &str = "gravel & \"sand\" at 'the' corner";
/// A flag reason with markup characters.
const FLAG_REASON: &str = "drained on the bench <fast> & \"dry\"";

/// van Genuchten class means, Carsel & Parrish (1988) table 3 (theta_r, theta_s, alpha 1/cm, n).
const LOAM: [f64; 4] = [0.078, 0.43, 0.036, 1.56];
const SANDY_LOAM: [f64; 4] = [0.065, 0.41, 0.075, 1.89];
const CLAY_LOAM: [f64; 4] = [0.095, 0.41, 0.019, 1.31];

/// Typical lab suctions, cm (common practice: hanging column, sandbox, pressure plates).
const SUCTIONS_CM: [f64; 9] = [0.0, 10.0, 30.0, 60.0, 100.0, 330.0, 1000.0, 3000.0, 15000.0];

fn source(name: &str, text: &str) -> Source {
    Source {
        name: name.to_string(),
        bytes: text.as_bytes().to_vec(),
    }
}

/// Site, top, bottom, sample code, van Genuchten parameters, suctions (cm).
type LabSample<'a> = (&'a str, f64, f64, &'a str, [f64; 4], &'a [f64]);

/// A lab sheet: every sample on every suction of `suctions`, water content from its curve
/// with a small deterministic scatter (+-0.003) so the fits have residuals.
fn lab_sheet(samples: &[LabSample<'_>]) -> String {
    let vg = ModelKind::VanGenuchten.curve();
    let mut text = String::from("site,top_cm,bottom_cm,sample,method,suction_cm,theta\n");
    for (site, top, bottom, code, p, suctions) in samples {
        for (i, h) in suctions.iter().enumerate() {
            let scatter = [0.003, -0.002, 0.001, -0.003, 0.002][i % 5];
            let _ = writeln!(
                text,
                "{site},{top},{bottom},{code},pressure plate,{h},{:.5}",
                vg.value(*h, p) + scatter
            );
        }
    }
    text
}

/// A small campaign with everything an export must handle: a site whose name is markup, a
/// note with `&` and quotes, a horizon with `<` and `&`, a site without coordinates (created
/// by the lab sheet), a sample too small to fit, an excluded reading and its refit, an open
/// suggestion, a dismissed one, and a stale fit.
fn fixture(dir: &Path) -> PathBuf {
    let db = dir.join("fixture.sqlite");
    let mut c = Campaign::create(&db, "Export & \"test\" campaign", 33.0, 1500.0).expect("create");
    let sites = format!(
        "site,name,latitude,longitude,elevation_m,notes\n\
         XSS,{SCRIPT_NAME},-33.5,-70.25,520,\"{}\"\nPLN,Plain,0.5,0.75,10,\n",
        NOTE.replace('"', "\"\"")
    );
    let layers = "site,top_cm,bottom_cm,horizon,sand_pct,silt_pct,clay_pct,organic_carbon_pct,bulk_density_g_cm3,ks_cm_per_day\n\
                  XSS,0,30,A<1>&B,40,40,20,1.2,1.4,20\n\
                  XSS,30,70,Bw,30,40,30,0.5,1.5,8\n\
                  PLN,0,40,Ap,60,30,10,1.0,1.45,50\n";
    let lab = lab_sheet(&[
        ("XSS", 0.0, 30.0, "XSS-A-a", LOAM, &SUCTIONS_CM),
        ("XSS", 0.0, 30.0, "XSS-A-b", LOAM, &SUCTIONS_CM),
        ("XSS", 30.0, 70.0, "XSS-B-a", CLAY_LOAM, &SUCTIONS_CM),
        ("PLN", 0.0, 40.0, "PLN-A-a", SANDY_LOAM, &SUCTIONS_CM),
        ("NOC", 0.0, 25.0, "NOC-1", LOAM, &SUCTIONS_CM),
        ("NOC", 0.0, 25.0, "NOC-few", LOAM, &[10.0, 1000.0, 15000.0]),
    ]);
    for (kind, name, text) in [
        (ImportKind::Sites, "sites.csv", sites.as_str()),
        (ImportKind::Layers, "layers.csv", layers),
        (ImportKind::Lab, "lab.csv", lab.as_str()),
    ] {
        import_sources(
            &mut c,
            kind,
            &[source(name, text)],
            ImportOptions::default(),
        )
        .expect("import");
    }
    let fit = |c: &mut Campaign, selection: &Selection| {
        fit_campaign(
            c,
            selection,
            ModelChoice::Auto,
            &FitOptions::new(),
            &|_, _| {},
        )
        .expect("fit")
    };
    let summary = fit(&mut c, &Selection::all());
    assert_eq!(summary.failed.len(), 1, "NOC-few cannot be fitted");
    let reading = |c: &Campaign, sample: &str, h: f64| -> i64 {
        c.connection()
            .query_row(
                "SELECT r.id FROM reading r JOIN sample m ON m.id = r.sample_id
                 WHERE m.code = ?1 AND r.h_cm = ?2",
                rusqlite::params![sample, h],
                |r| r.get(0),
            )
            .expect("reading")
    };
    {
        let conn = c.connection();
        let bad = reading(&c, "XSS-A-a", 60.0);
        flags::flag_manual(
            conn,
            FlagTarget::Reading(bad),
            FLAG_REASON,
            Some("seen 'twice' & noted"),
        )
        .expect("manual flag");
        let open = reading(&c, "PLN-A-a", 1000.0);
        flags::suggest(
            conn,
            &Suggestion {
                target: FlagTarget::Reading(open),
                rule: "leave-one-out",
                reason: "studentized residual 3.2 > 3",
                score: Some(3.2),
            },
        )
        .expect("suggestion");
        let kept = reading(&c, "XSS-B-a", 330.0);
        let raised = flags::suggest(
            conn,
            &Suggestion {
                target: FlagTarget::Reading(kept),
                rule: "leave-one-out",
                reason: "studentized residual 3.1 > 3",
                score: Some(3.1),
            },
        )
        .expect("suggestion");
        flags::dismiss(conn, raised.id(), Some("plate checked")).expect("dismiss");
    }
    fit(
        &mut c,
        &Selection {
            samples: vec!["XSS-A-a".into()],
            ..Selection::default()
        },
    );
    c.connection()
        .execute(
            "UPDATE reading SET theta = theta + 0.004 WHERE id = ?1",
            [reading(&c, "XSS-A-b", 100.0)],
        )
        .expect("change a reading");
    db
}

struct Exported {
    _tmp: TempDir,
    db: PathBuf,
    dir: PathBuf,
}

impl Exported {
    fn new() -> Self {
        let tmp = tempfile::tempdir().expect("temp dir");
        let db = fixture(tmp.path());
        let dir = tmp.path().join("out");
        let campaign = Campaign::open(&db).expect("open");
        export_campaign(campaign.connection(), &ExportOptions::new(&dir), &|_, _| {})
            .expect("export");
        Self { _tmp: tmp, db, dir }
    }

    fn text(&self, name: &str) -> String {
        std::fs::read_to_string(self.dir.join(name)).expect("read export file")
    }

    fn csv(&self, name: &str) -> (Vec<String>, Vec<BTreeMap<String, String>>) {
        let mut reader = csv::Reader::from_path(self.dir.join(name)).expect("csv");
        let header: Vec<String> = reader
            .headers()
            .expect("header")
            .iter()
            .map(str::to_string)
            .collect();
        let rows = reader
            .records()
            .map(|r| {
                let r = r.expect("record");
                assert_eq!(r.len(), header.len());
                header
                    .iter()
                    .cloned()
                    .zip(r.iter().map(str::to_string))
                    .collect()
            })
            .collect();
        (header, rows)
    }
}

/// Parse XML, allowing the page's `<!DOCTYPE html>` (no entities are declared in it).
fn parse_xml(text: &str) -> Result<roxmltree::Document<'_>, roxmltree::Error> {
    roxmltree::Document::parse_with_options(
        text,
        roxmltree::ParsingOptions {
            allow_dtd: true,
            ..roxmltree::ParsingOptions::default()
        },
    )
}

fn number(row: &BTreeMap<String, String>, column: &str) -> Option<f64> {
    let cell = row
        .get(column)
        .unwrap_or_else(|| panic!("no column {column}"));
    (!cell.is_empty()).then(|| {
        cell.parse()
            .unwrap_or_else(|_| panic!("{column}: {cell:?}"))
    })
}

/// Every text node of an XML tree, concatenated per element.
fn texts(doc: &roxmltree::Document<'_>) -> Vec<String> {
    doc.descendants()
        .filter(roxmltree::Node::is_element)
        .map(|n| n.children().filter_map(|c| c.text()).collect::<String>())
        .collect()
}

#[test]
fn every_file_parses_back() {
    let e = Exported::new();
    let mut names: Vec<String> = std::fs::read_dir(&e.dir)
        .expect("dir")
        .map(|d| d.expect("entry").file_name().to_string_lossy().into_owned())
        .collect();
    names.sort();
    let mut expected: Vec<String> = ALL_FILES.iter().map(ToString::to_string).collect();
    expected.sort();
    assert_eq!(names, expected, "exactly the five files, no temporary left");

    let (header, rows) = e.csv(PARAMETERS_FILE);
    assert_eq!(
        &header[..7],
        [
            "site",
            "layer",
            "horizon",
            "texture",
            "top_cm",
            "bottom_cm",
            "sample"
        ]
    );
    for column in [
        "theta_r",
        "theta_r_se",
        "rmse_m3_m3",
        "available_water_m3_m3",
        "stale",
    ] {
        assert!(header.iter().any(|h| h == column), "missing {column}");
    }
    let samples: Vec<&str> = rows.iter().map(|r| r["sample"].as_str()).collect();
    assert_eq!(
        samples,
        [
            "NOC-1", "NOC-few", "PLN-A-a", "XSS-A-a", "XSS-A-b", "XSS-B-a"
        ],
        "one row per sample, by site, depth and code"
    );
    let (_, profile_rows) = e.csv(PROFILES_FILE);
    assert_eq!(
        profile_rows.iter().filter(|r| r["row"] == "total").count(),
        3,
        "a total per site"
    );

    let doc: CampaignDocument = serde_json::from_str(&e.text(CAMPAIGN_FILE)).expect("json");
    assert_eq!(doc.format, FORMAT);
    assert_eq!(doc.schema_version, SCHEMA_VERSION);
    assert_eq!(doc.program.version, env!("CARGO_PKG_VERSION"));
    assert_eq!(
        doc.fingerprint_sha256,
        fingerprint(&doc.data),
        "fingerprint recomputes"
    );
    assert!(chrono::DateTime::parse_from_rfc3339(&doc.exported_at).is_ok());
    let json_samples: usize = doc
        .data
        .sites
        .iter()
        .flat_map(|s| &s.layers)
        .map(|l| l.samples.len())
        .sum();
    assert_eq!(json_samples, 6);

    // RFC 7946: a FeatureCollection of Features; Point coordinates are [longitude, latitude].
    let geo: serde_json::Value = serde_json::from_str(&e.text(SITES_FILE)).expect("geojson");
    assert_eq!(geo["type"], "FeatureCollection");
    assert!(
        geo.get("crs").is_none(),
        "RFC 7946 section 4: no crs member"
    );
    let features = geo["features"].as_array().expect("features array");
    assert_eq!(features.len(), 3);
    let mut located = BTreeMap::new();
    for f in features {
        assert_eq!(f["type"], "Feature");
        assert!(f["properties"].is_object(), "{f}");
        assert!(f["id"].is_string());
        let geometry = &f["geometry"];
        if geometry.is_null() {
            continue;
        }
        assert_eq!(geometry["type"], "Point");
        let c = geometry["coordinates"].as_array().expect("coordinates");
        assert_eq!(c.len(), 2);
        let (lon, lat) = (c[0].as_f64().expect("lon"), c[1].as_f64().expect("lat"));
        assert!((-180.0..=180.0).contains(&lon) && (-90.0..=90.0).contains(&lat));
        located.insert(f["id"].as_str().expect("id").to_string(), (lon, lat));
    }
    assert_eq!(located["XSS"], (-70.25, -33.5), "longitude first");
    assert_eq!(located["PLN"], (0.75, 0.5));
    let noc = features.iter().find(|f| f["id"] == "NOC").expect("NOC");
    assert!(
        noc["geometry"].is_null(),
        "a site without coordinates is unlocated"
    );
    assert_eq!(noc["properties"]["samples"], 2);

    let html = e.text(REPORT_FILE);
    let page = parse_xml(&html).expect("report.html is well-formed XML");
    assert_eq!(page.root_element().tag_name().name(), "html");
    assert_eq!(
        page.root_element().tag_name().namespace(),
        Some("http://www.w3.org/1999/xhtml")
    );
    assert!(
        page.descendants().all(|n| n.tag_name().name() != "script"),
        "no script element"
    );
    let svgs: Vec<_> = page
        .descendants()
        .filter(|n| n.tag_name().name() == "svg")
        .collect();
    assert_eq!(svgs.len(), 3, "one chart per site");
    for svg in &svgs {
        assert_eq!(
            svg.tag_name().namespace(),
            Some("http://www.w3.org/2000/svg")
        );
        let text = &html[svg.range()];
        parse_xml(text).expect("each SVG parses on its own");
    }
    // Self-contained: no external resource is referenced.
    for attr in ["src", "href"] {
        for n in page.descendants() {
            if let Some(v) = n.attribute(attr) {
                assert!(v.starts_with('#'), "{attr}={v:?} points outside the page");
            }
        }
    }
}

#[test]
fn parameters_equal_the_stored_fits() {
    let e = Exported::new();
    let (header, rows) = e.csv(PARAMETERS_FILE);
    let campaign = Campaign::open(&e.db).expect("open");
    let conn = campaign.connection();
    let settings = campaign.settings().expect("settings");
    let current: BTreeMap<String, _> = sample_fits(conn, &settings, &Selection::all())
        .expect("fits")
        .into_iter()
        .map(|f| (f.sample.code.clone(), f))
        .collect();
    let mut checked = 0;
    for row in &rows {
        let sample = &current[&row["sample"]];
        let Some(fit) = &sample.fit else {
            assert_eq!(row["model"], "");
            assert!(
                header
                    .iter()
                    .filter(|h| h.ends_with("_se"))
                    .all(|h| row[h].is_empty())
            );
            continue;
        };
        // Straight from the store, not through the export's own reading.
        let stored = fits::current(conn, sample.sample.id)
            .expect("query")
            .expect("current fit");
        assert_eq!(stored.id.to_string(), row["fit_id"]);
        let report = stored.report.as_ref().expect("report");
        assert_eq!(row["model"], fit.model);
        for p in &report.parameters {
            assert_eq!(
                number(row, &p.name),
                Some(p.value),
                "{} {}",
                row["sample"],
                p.name
            );
            assert_eq!(number(row, &format!("{}_se", p.name)), p.se);
            checked += 1;
        }
        assert_eq!(number(row, "sse"), Some(report.sse));
        assert_eq!(number(row, "rmse_m3_m3"), Some(report.rmse));
        assert_eq!(number(row, "r2"), report.r2);
        assert_eq!(number(row, "aicc"), report.aicc);
        assert_eq!(number(row, "n_points"), Some(stored.n_points as f64));
        let values = &sample.derived.as_ref().expect("derived").values;
        assert_eq!(number(row, "theta_fc_m3_m3"), values.theta_field_capacity);
        assert_eq!(number(row, "theta_pwp_m3_m3"), values.theta_wilting_point);
        assert_eq!(
            number(row, "available_water_m3_m3"),
            values.plant_available_water
        );
        assert_eq!(row["stale"], sample.state.is_stale().to_string());
    }
    assert!(
        checked >= 16,
        "parameters of every fitted sample compared ({checked})"
    );
    let by_sample: BTreeMap<&str, &BTreeMap<String, String>> =
        rows.iter().map(|r| (r["sample"].as_str(), r)).collect();
    assert_eq!(by_sample["XSS-A-a"]["n_excluded"], "1");
    assert_eq!(
        by_sample["XSS-A-a"]["n_points"], "8",
        "the refit left the flagged reading out"
    );
    assert_eq!(
        by_sample["PLN-A-a"]["n_flagged"], "1",
        "an open suggestion is flagged"
    );
    assert_eq!(by_sample["PLN-A-a"]["n_excluded"], "0", "but not excluded");
    assert_eq!(
        by_sample["XSS-B-a"]["n_flagged"], "0",
        "a dismissed suggestion is not"
    );
    assert_eq!(by_sample["XSS-A-b"]["state"], "stale");
    assert_eq!(by_sample["XSS-A-b"]["stale"], "true");
    assert_eq!(by_sample["NOC-few"]["state"], "failed");
    assert!(!by_sample["NOC-few"]["state_detail"].is_empty());

    // profiles.csv holds what analysis::profiles computes.
    let (_, profile_rows) = e.csv(PROFILES_FILE);
    for p in profiles(conn, &settings, 100.0, None).expect("profiles") {
        let total = profile_rows
            .iter()
            .find(|r| r["site"] == p.site && r["row"] == "total")
            .expect("total row");
        assert_eq!(number(total, "water_mm"), Some(p.total_mm), "{}", p.site);
        assert_eq!(number(total, "uncovered_cm"), Some(p.uncovered_cm()));
        let layers: Vec<_> = profile_rows
            .iter()
            .filter(|r| r["site"] == p.site && r["row"] == "layer")
            .collect();
        assert_eq!(layers.len(), p.layers.len());
        for (row, w) in layers.iter().zip(&p.layers) {
            assert_eq!(number(row, "available_water_m3_m3"), w.available_water);
            assert_eq!(number(row, "water_mm"), w.water_mm);
        }
    }
}

#[test]
fn user_text_stays_text() {
    let e = Exported::new();
    let html = e.text(REPORT_FILE);
    assert!(!html.contains(SCRIPT_NAME), "the site name is never markup");
    assert!(html.contains("&lt;script&gt;alert(1)&lt;/script&gt;"));
    assert!(!html.contains("A<1>&B"), "the horizon label is escaped");
    let page = parse_xml(&html).expect("well-formed");
    let all = texts(&page);
    assert!(
        all.iter().any(|t| t.contains(SCRIPT_NAME)),
        "the name reads as text"
    );
    assert!(
        all.iter().any(|t| t.contains(NOTE)),
        "the note reads as text"
    );
    assert!(
        all.iter().any(|t| t.contains(FLAG_REASON)),
        "the flag reason reads as text"
    );
    assert!(
        all.iter().any(|t| t.contains("seen 'twice' & noted")),
        "the flag note too"
    );
    assert!(
        all.iter().any(|t| t.contains("Export & \"test\" campaign")),
        "the campaign name"
    );
    // Inside the SVG the legend carries the horizon label as text.
    let legend_has_label = page
        .descendants()
        .filter(|n| n.tag_name().name() == "text")
        .any(|n| n.text().is_some_and(|t| t.contains("A<1>&B 0-30 cm")));
    assert!(
        legend_has_label,
        "the chart legend shows the horizon as text"
    );
    assert!(page.descendants().all(|n| n.tag_name().name() != "script"));

    // JSON and CSV keep the text as it is.
    let doc: CampaignDocument = serde_json::from_str(&e.text(CAMPAIGN_FILE)).expect("json");
    let xss = doc
        .data
        .sites
        .iter()
        .find(|s| s.code == "XSS")
        .expect("site");
    assert_eq!(xss.name.as_deref(), Some(SCRIPT_NAME));
    assert_eq!(xss.notes.as_deref(), Some(NOTE));
    let geo: serde_json::Value = serde_json::from_str(&e.text(SITES_FILE)).expect("geojson");
    assert_eq!(geo["features"][2]["properties"]["name"], SCRIPT_NAME);
    let (_, rows) = e.csv(PARAMETERS_FILE);
    assert!(rows.iter().any(|r| r["horizon"] == "A<1>&B"));
}

#[test]
fn flags_carry_their_reasons_and_trail() {
    let e = Exported::new();
    let doc: CampaignDocument = serde_json::from_str(&e.text(CAMPAIGN_FILE)).expect("json");
    let samples: BTreeMap<&str, _> = doc
        .data
        .sites
        .iter()
        .flat_map(|s| &s.layers)
        .flat_map(|l| &l.samples)
        .map(|m| (m.code.as_str(), m))
        .collect();
    let a = samples["XSS-A-a"];
    let flagged: Vec<_> = a.readings.iter().filter(|r| !r.flags.is_empty()).collect();
    assert_eq!(flagged.len(), 1);
    let r = flagged[0];
    assert_eq!(r.suction_cm, 60.0);
    assert!(r.excluded && !r.used_in_fit);
    assert_eq!(r.flags[0].reason, FLAG_REASON);
    assert_eq!(r.flags[0].rule.as_deref(), Some("manual"));
    assert!(!r.flags[0].events.is_empty(), "the audit trail is exported");
    assert_eq!(r.provenance.file_name.as_deref(), Some("lab.csv"));
    assert!(r.provenance.line.is_some_and(|l| l > 1));
    assert!(
        a.readings
            .iter()
            .filter(|r| !r.excluded)
            .all(|r| r.used_in_fit),
        "every other reading is in the refit"
    );
    let fit = a.fit.as_ref().expect("fit");
    assert_eq!(fit.residuals.len(), 8);
    assert!(fit.residuals.iter().all(|d| d.reading_id.is_some()));
    assert!(fit.covariance.is_some(), "fits carry their covariance");
    let kept = samples["XSS-B-a"]
        .readings
        .iter()
        .find(|r| !r.flags.is_empty())
        .expect("dismissed flag");
    assert_eq!(kept.flags[0].status.as_str(), "dismissed");
    assert_eq!(kept.flags[0].events.len(), 2, "raised, then dismissed");
    assert!(!kept.excluded && kept.used_in_fit);
    assert!(matches!(samples["XSS-A-b"].fit_state, FitState::Stale(_)));

    let html = e.text(REPORT_FILE);
    let page = parse_xml(&html).expect("well-formed");
    let flagged_rows: Vec<String> = page
        .descendants()
        .filter(|n| n.tag_name().name() == "tr")
        .map(|tr| {
            tr.descendants()
                .filter_map(|n| n.text())
                .collect::<Vec<_>>()
                .join("|")
        })
        .filter(|t| t.contains("leave-one-out") || t.contains(FLAG_REASON))
        .collect();
    assert_eq!(flagged_rows.len(), 3, "{flagged_rows:#?}");
    assert!(flagged_rows.iter().any(|t| t.contains("plate checked")));
    assert!(
        flagged_rows
            .iter()
            .any(|t| t.contains("studentized residual 3.2"))
    );
}

/// A file with the lines that state the export time removed.
fn without_export_time(bytes: &[u8]) -> String {
    String::from_utf8_lossy(bytes)
        .lines()
        .filter(|l| !l.contains("\"exported_at\"") && !l.contains("class=\"exported\""))
        .collect::<Vec<_>>()
        .join("\n")
}

#[test]
fn two_exports_differ_only_in_the_export_time() {
    let tmp = tempfile::tempdir().expect("temp dir");
    let db = fixture(tmp.path());
    let campaign = Campaign::open(&db).expect("open");
    let conn = campaign.connection();
    let first = build_export(conn, &ExportOptions::new(tmp.path()), &|_, _| {}).expect("first");
    let then = chrono::Utc
        .with_ymd_and_hms(2031, 5, 6, 7, 8, 9)
        .single()
        .expect("time");
    let second = build_export(
        conn,
        &ExportOptions::new(tmp.path()).with_exported_at(then),
        &|_, _| {},
    )
    .expect("second");
    assert_eq!(first.fingerprint, second.fingerprint);
    assert_eq!(first.files.len(), 5);
    for (a, b) in first.files.iter().zip(&second.files) {
        assert_eq!(a.name, b.name);
        let (ta, tb) = (without_export_time(&a.bytes), without_export_time(&b.bytes));
        assert!(ta == tb, "{} differs beyond the export time", a.name);
        let changed = String::from_utf8_lossy(&a.bytes)
            .lines()
            .zip(String::from_utf8_lossy(&b.bytes).lines())
            .filter(|(x, y)| x != y)
            .count();
        let expected = usize::from(matches!(a.name, "campaign.json" | "report.html"));
        assert_eq!(changed, expected, "{}: lines that changed", a.name);
    }
    let json = String::from_utf8_lossy(second.file(CAMPAIGN_FILE).expect("json")).into_owned();
    assert!(json.contains("\"exported_at\": \"2031-05-06T07:08:09Z\""));
    let html = String::from_utf8_lossy(second.file(REPORT_FILE).expect("html")).into_owned();
    assert!(html.contains("Exported at 2031-05-06T07:08:09Z"));

    // A change to the campaign changes the content and its fingerprint.
    conn.execute(
        "UPDATE site SET notes = 'moved a little' WHERE code = 'PLN'",
        [],
    )
    .expect("edit");
    let third = build_export(conn, &ExportOptions::new(tmp.path()), &|_, _| {}).expect("third");
    assert_ne!(third.fingerprint, first.fingerprint);
}

/// Every key path of a JSON value (array items as `[]`), sorted.
fn key_paths(value: &serde_json::Value, prefix: &str, out: &mut BTreeSet<String>) {
    match value {
        serde_json::Value::Object(map) => {
            for (k, v) in map {
                let path = format!("{prefix}.{k}");
                out.insert(path.clone());
                key_paths(v, &path, out);
            }
        }
        serde_json::Value::Array(items) => {
            for v in items {
                key_paths(v, &format!("{prefix}[]"), out);
            }
        }
        _ => {}
    }
}

#[test]
fn the_json_schema_is_what_its_version_says() {
    let e = Exported::new();
    let value: serde_json::Value = serde_json::from_str(&e.text(CAMPAIGN_FILE)).expect("json");
    let mut paths = BTreeSet::new();
    key_paths(&value, "", &mut paths);
    // Parameter names and model ids are data, not schema.
    let paths: Vec<String> = paths
        .into_iter()
        .filter(|p| !p.contains(".fixed."))
        .collect();
    // A change here is a change of the documented layout: bump SCHEMA_VERSION with it.
    insta::assert_snapshot!(format!(
        "schema_version {SCHEMA_VERSION}\n{}",
        paths.join("\n")
    ));
}

#[test]
fn one_site_and_some_formats() {
    let tmp = tempfile::tempdir().expect("temp dir");
    let db = fixture(tmp.path());
    let out = tmp.path().join("pln");
    let assert = porewise()
        .arg("export")
        .arg(&db)
        .arg("--to")
        .arg(&out)
        .args([
            "--site",
            "PLN",
            "--format",
            "csv,geojson",
            "--root-zone-cm",
            "30",
        ])
        .assert()
        .success();
    let stdout = String::from_utf8_lossy(&assert.get_output().stdout).into_owned();
    assert!(
        stdout.contains("exported 1 site, 1 sample and 9 readings"),
        "{stdout}"
    );
    let mut names: Vec<String> = std::fs::read_dir(&out)
        .expect("dir")
        .map(|d| d.expect("entry").file_name().to_string_lossy().into_owned())
        .collect();
    names.sort();
    assert_eq!(names, ["parameters.csv", "profiles.csv", "sites.geojson"]);
    let profiles = std::fs::read_to_string(out.join(PROFILES_FILE)).expect("profiles");
    assert!(
        profiles.lines().skip(1).all(|l| l.starts_with("PLN,")),
        "{profiles}"
    );
    assert!(profiles.contains("PLN,total,PLN:0-30,"), "{profiles}");

    let unknown = porewise()
        .arg("export")
        .arg(&db)
        .arg("--to")
        .arg(tmp.path().join("none"))
        .args(["--site", "ZZZ"])
        .assert()
        .code(1);
    assert!(
        stderr(&unknown).contains("no site \"ZZZ\""),
        "{}",
        stderr(&unknown)
    );
    assert!(
        !tmp.path().join("none").exists(),
        "nothing written for a bad site"
    );
    porewise()
        .arg("export")
        .arg(&db)
        .arg("--to")
        .arg(&out)
        .args(["--format", "pdf"])
        .assert()
        .code(2);
}

#[test]
fn the_target_folder_is_checked() {
    let tmp = tempfile::tempdir().expect("temp dir");
    let db = fixture(tmp.path());
    let out = tmp.path().join("summary");
    let export = |formats: &str| {
        porewise()
            .arg("export")
            .arg(&db)
            .arg("--to")
            .arg(&out)
            .args(["--format", formats])
            .assert()
    };
    export("csv,json,geojson,html").success();
    let before = std::fs::read(out.join(PARAMETERS_FILE)).expect("read");
    // An earlier export is replaced as a whole: a file of a format not asked for goes with
    // it (and is named), so the folder never mixes two exports.
    let again = export("csv");
    let again = again.success();
    assert!(
        stderr(&again).contains("report.html of the earlier export is gone"),
        "{}",
        stderr(&again)
    );
    assert!(!out.join(REPORT_FILE).exists());
    assert_eq!(
        std::fs::read(out.join(PARAMETERS_FILE)).expect("read"),
        before
    );
    let mut names: Vec<String> = std::fs::read_dir(&out)
        .expect("folder")
        .map(|e| e.expect("entry").file_name().to_string_lossy().into_owned())
        .collect();
    names.sort();
    assert_eq!(names, [PARAMETERS_FILE, PROFILES_FILE]);
    // Nothing is left beside the folder either (no staging or old folder).
    let beside: Vec<String> = std::fs::read_dir(tmp.path())
        .expect("parent")
        .map(|e| e.expect("entry").file_name().to_string_lossy().into_owned())
        .filter(|n| n.starts_with('.'))
        .collect();
    assert!(beside.is_empty(), "{beside:?}");
    // Anything else in the folder: refused, nothing touched.
    std::fs::write(out.join("thesis.docx"), "mine").expect("write");
    let refused = export("csv").code(1);
    assert!(
        stderr(&refused).contains("thesis.docx"),
        "{}",
        stderr(&refused)
    );
    assert_eq!(
        std::fs::read(out.join("thesis.docx")).expect("read"),
        b"mine"
    );
    // A file where the folder should be.
    let file = tmp.path().join("plain-file");
    std::fs::write(&file, "x").expect("write");
    let campaign = Campaign::open(&db).expect("open");
    let err = export_campaign(
        campaign.connection(),
        &ExportOptions::new(&file),
        &|_, _| {},
    )
    .expect_err("not a folder");
    assert!(err.to_string().contains("is not a folder"), "{err}");
    let err = export_campaign(
        campaign.connection(),
        &ExportOptions::new(tmp.path().join("x")).with_formats(&[]),
        &|_, _| {},
    )
    .expect_err("no format");
    assert!(err.to_string().contains("no format"), "{err}");
    let err = export_campaign(
        campaign.connection(),
        &ExportOptions::new(tmp.path().join("x")).with_root_zone_cm(-5.0),
        &|_, _| {},
    )
    .expect_err("bad root zone");
    assert!(err.to_string().contains("-5"), "{err}");
}

#[test]
fn progress_counts_up_to_its_total() {
    let tmp = tempfile::tempdir().expect("temp dir");
    let db = fixture(tmp.path());
    let campaign = Campaign::open(&db).expect("open");
    let seen = std::sync::Mutex::new(Vec::new());
    build_export(
        campaign.connection(),
        &ExportOptions::new(tmp.path()).with_formats(&[ExportFormat::Html]),
        &|done, total| seen.lock().expect("lock").push((done, total)),
    )
    .expect("export");
    let seen = seen.into_inner().expect("lock");
    // 6 samples read, 3 charts drawn, 1 file encoded.
    assert_eq!(seen.last(), Some(&(10, 10)), "{seen:?}");
    assert!(seen.windows(2).all(|w| w[0].0 < w[1].0), "{seen:?}");
}

#[test]
fn the_demo_campaign_exports_every_sample() {
    let tmp = tempfile::tempdir().expect("temp dir");
    let src = Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-db");
    for file in porewise::demo::generate() {
        std::fs::copy(src.join(file.name), tmp.path().join(file.name)).expect("copy");
    }
    let db = porewise::cli::demo::ensure_built(tmp.path()).expect("demo builds");
    let campaign = Campaign::open(&db).expect("open");
    let conn = campaign.connection();
    let out = tmp.path().join("export");
    let summary = export_campaign(conn, &ExportOptions::new(&out), &|_, _| {}).expect("export");
    let codes: BTreeSet<String> = fits::samples(conn, &Selection::all())
        .expect("samples")
        .into_iter()
        .map(|s| s.code)
        .collect();
    // 29 lab cores (28 and the four-reading TER1-A-c) and the two field pairings of the
    // logger at TER1 (demo-db/README.md).
    assert_eq!(codes.len(), 31);
    assert_eq!(summary.samples, codes.len());

    let mut reader = csv::Reader::from_path(out.join(PARAMETERS_FILE)).expect("csv");
    let column = reader
        .headers()
        .expect("header")
        .iter()
        .position(|h| h == "sample")
        .expect("sample column");
    let in_csv: BTreeSet<String> = reader
        .records()
        .map(|r| r.expect("row")[column].to_string())
        .collect();
    assert_eq!(in_csv, codes, "parameters.csv");

    let doc: CampaignDocument =
        serde_json::from_str(&std::fs::read_to_string(out.join(CAMPAIGN_FILE)).expect("json"))
            .expect("parses");
    let in_json: BTreeSet<String> = doc
        .data
        .sites
        .iter()
        .flat_map(|s| &s.layers)
        .flat_map(|l| &l.samples)
        .map(|m| m.code.clone())
        .collect();
    assert_eq!(in_json, codes, "campaign.json");
    let readings: usize = doc
        .data
        .sites
        .iter()
        .flat_map(|s| &s.layers)
        .flat_map(|l| &l.samples)
        .map(|m| m.readings.len())
        .sum();
    let stored: i64 = conn
        .query_row("SELECT count(*) FROM reading", [], |r| r.get(0))
        .expect("count");
    assert_eq!(readings as i64, stored);

    let html = std::fs::read_to_string(out.join(REPORT_FILE)).expect("html");
    let page = parse_xml(&html).expect("well-formed");
    let cells: BTreeSet<String> = page
        .descendants()
        .filter(is_code_cell)
        // A field pairing's cell reads "CODE (field pairing)": its first text is the code.
        .filter_map(|n| n.text().map(|t| t.trim().to_string()))
        .collect();
    for code in &codes {
        assert!(cells.contains(code), "report.html lists {code}");
    }
    // The layer with texture and no core: its estimate with its source, apart from the
    // measured values, in the page and in campaign.json; the four-reading core's basis.
    let estimates: Vec<String> = page
        .descendants()
        .filter(|n| n.tag_name().name() == "tr")
        .map(|n| n.descendants().filter_map(|d| d.text()).collect::<String>())
        .filter(|t| t.contains("◌"))
        .collect();
    assert_eq!(estimates.len(), 1, "{estimates:?}");
    assert!(
        estimates[0].contains("Ck") && estimates[0].contains("clay"),
        "{estimates:?}"
    );
    assert!(
        estimates[0].contains("Carsel & Parrish (1988)"),
        "{estimates:?}"
    );
    let layers: Vec<_> = doc.data.sites.iter().flat_map(|s| &s.layers).collect();
    let with_estimate: Vec<(f64, Option<&str>)> = layers
        .iter()
        .filter_map(|l| {
            l.texture_estimate
                .as_ref()
                .map(|e| (l.top_cm, Some(e.class.as_str())))
        })
        .collect();
    assert_eq!(with_estimate, [(90.0, Some("clay"))]);
    // Beside the class mean, the pedotransfer estimate from its sand, clay and organic carbon
    // (Saxton & Rawls 2006): the library's value, named in the page too.
    let ck = layers
        .iter()
        .find(|l| l.texture_estimate.is_some())
        .expect("the texture-only layer");
    let ptf = ck
        .pedotransfer_estimate
        .as_ref()
        .expect("a pedotransfer estimate");
    let want = porewise::analysis::texture::pedotransfer_estimate(
        ck.sand_pct,
        ck.clay_pct,
        ck.organic_carbon_pct,
        doc.data.campaign.field_capacity_kpa,
        doc.data.campaign.wilting_point_kpa,
    )
    .expect("computable");
    assert_eq!(*ptf, want);
    assert!(ptf.available_water_m3_m3 > 0.0 && ptf.theta_fc_m3_m3 < ptf.theta_s_m3_m3);
    assert!(
        estimates[0].contains(&format!(
            "FC {}",
            porewise::model::number::significant(ptf.theta_fc_m3_m3, 3).expect("digits")
        )),
        "{estimates:?}"
    );
    assert!(
        layers
            .iter()
            .filter(|l| l.pedotransfer_estimate.is_some())
            .all(|l| l.texture_estimate.is_some()),
        "only layers without a fitted core get one"
    );
    assert!(layers.iter().all(|l| l.texture_class.is_some()));
    let four = layers
        .iter()
        .flat_map(|l| &l.samples)
        .find(|m| m.code == "TER1-A-c")
        .and_then(|m| m.fit.as_ref())
        .expect("the four-reading core's fit");
    assert_eq!(four.basis, "readings+texture prior");
    let geo: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join(SITES_FILE)).expect("geo"))
            .expect("parses");
    assert_eq!(geo["features"].as_array().map(Vec::len), Some(4));
}

/// `td class="code"` cells (sample codes in the parameter tables).
fn is_code_cell(n: &roxmltree::Node<'_, '_>) -> bool {
    n.tag_name().name() == "td" && n.attribute("class") == Some("code")
}

/// The `derived` member of a sample's fit in an exported campaign.json.
fn exported_derived(dir: &Path, sample: &str) -> (serde_json::Value, serde_json::Value) {
    let text = std::fs::read_to_string(dir.join(CAMPAIGN_FILE)).expect("campaign.json");
    let doc: serde_json::Value = serde_json::from_str(&text).expect("json");
    let fit = doc["data"]["sites"]
        .as_array()
        .expect("sites")
        .iter()
        .flat_map(|s| s["layers"].as_array().expect("layers"))
        .flat_map(|l| l["samples"].as_array().expect("samples"))
        .find(|m| m["code"] == sample)
        .map(|m| m["fit"].clone())
        .expect("sample");
    (fit, doc["data"]["scope"].clone())
}

#[test]
fn brooks_corey_fits_carry_their_conductivity_form_into_the_export() {
    let tmp = tempfile::tempdir().expect("temp dir");
    let db = fixture(tmp.path());
    // XSS 0-30 cm has Ks 20 cm/day; refit one of its cores with Brooks-Corey and Mualem.
    porewise()
        .arg("fit")
        .arg(&db)
        .args(["--sample", "XSS-A-b", "--model", "brooks-corey"])
        .args(["--conductivity", "mualem"])
        .assert()
        .success();
    let export = |name: &str, extra: &[&str]| {
        let out = tmp.path().join(name);
        porewise()
            .arg("export")
            .arg(&db)
            .arg("--to")
            .arg(&out)
            .args(["--format", "json"])
            .args(extra)
            .assert()
            .success();
        exported_derived(&out, "XSS-A-b")
    };
    // K = Ks (h_b / h)^e above h_b: Mualem e = 2 + (L + 2) lambda with L = 0.5 (Mualem 1976),
    // Burdine e = 2 + 3 lambda (Burdine 1953), at field capacity 33 kPa.
    let check = |fit: &serde_json::Value, model: &str, exponent: &dyn Fn(f64) -> f64| {
        let derived = &fit["derived"];
        assert_eq!(derived["conductivity_model"], model, "{derived}");
        let param = |name: &str| {
            fit["parameters"]
                .as_array()
                .expect("parameters")
                .iter()
                .find(|p| p["name"] == name)
                .and_then(|p| p["value"].as_f64())
                .expect("parameter")
        };
        let (h_b, lambda) = (param("h_b_cm"), param("lambda"));
        let h = 33.0 * porewise::model::units::CM_PER_KPA;
        let want = 20.0 * (h_b / h).powf(exponent(lambda));
        let k = derived["k_field_capacity_cm_per_day"].as_f64().expect("K");
        assert!((k / want - 1.0).abs() < 1e-12, "{k} vs {want}");
    };
    let (fit, scope) = export("recorded", &[]);
    assert!(scope["conductivity"].is_null());
    check(&fit, "mualem-brooks-corey", &|l| 2.0 + 2.5 * l);
    // A refit after a review decision keeps the form the fit was made with.
    {
        let mut c = Campaign::open(&db).expect("open");
        let id: i64 = c
            .connection()
            .query_row("SELECT id FROM sample WHERE code = 'XSS-A-b'", [], |r| {
                r.get(0)
            })
            .expect("sample");
        porewise::analysis::review::refit_samples(&mut c, &[id]).expect("refit");
        let current = fits::current(c.connection(), id)
            .expect("read")
            .expect("fit");
        assert_eq!(current.model, "brooks-corey");
        assert_eq!(
            current.conductivity,
            Some(porewise::model::conductivity::ConductivityForm::Mualem)
        );
    }
    // The export may ask for the other form; van Genuchten fits keep Mualem's.
    let (fit, scope) = export("burdine", &["--conductivity", "burdine"]);
    assert_eq!(scope["conductivity"], "burdine");
    check(&fit, "burdine-brooks-corey", &|l| 2.0 + 3.0 * l);
    let other = exported_derived(&tmp.path().join("burdine"), "XSS-A-a").0;
    assert_eq!(
        other["derived"]["conductivity_model"], "mualem-van-genuchten",
        "{other}"
    );
    // A form the model does not have is refused before anything is fitted.
    let fit_rows = || -> i64 {
        Campaign::open(&db)
            .expect("open")
            .connection()
            .query_row("SELECT count(*) FROM fit", [], |r| r.get(0))
            .expect("count")
    };
    let before = fit_rows();
    let refused = porewise()
        .arg("fit")
        .arg(&db)
        .args(["--sample", "XSS-A-a", "--model", "van-genuchten"])
        .args(["--conductivity", "burdine"])
        .assert()
        .code(1);
    assert!(
        stderr(&refused).contains("van-genuchten has no burdine conductivity here"),
        "{}",
        stderr(&refused)
    );
    assert_eq!(fit_rows(), before);
    // Plain-file fits have no conductivity values to choose for.
    let plain = porewise()
        .args(["fit", "--input", "valid/pairs_two_samples.csv"])
        .args(["--conductivity", "mualem"])
        .assert()
        .code(1);
    assert!(stderr(&plain).contains("--conductivity applies to the fits of a campaign"));
}

#[test]
fn batches_write_what_the_whole_campaign_renders() {
    use porewise::report::export::{BATCH_SAMPLES, chart, geojson, html, schema, snapshot, tables};
    let tmp = tempfile::tempdir().expect("temp dir");
    let db = fixture(tmp.path());
    let mut c = Campaign::open(&db).expect("open");
    // One layer with more samples than two batches hold; a fit and a flag in each batch.
    let codes: Vec<String> = (0..2 * BATCH_SAMPLES + 50)
        .map(|i| format!("BIG-{i:04}"))
        .collect();
    let samples: Vec<LabSample<'_>> = codes
        .iter()
        .enumerate()
        .map(|(i, code)| {
            let p = [LOAM, SANDY_LOAM, CLAY_LOAM][i % 3];
            ("BIG", 0.0, 50.0, code.as_str(), p, &SUCTIONS_CM[..])
        })
        .collect();
    import_sources(
        &mut c,
        ImportKind::Lab,
        &[source("big.csv", &lab_sheet(&samples))],
        ImportOptions::default(),
    )
    .expect("import");
    let picked: Vec<String> = [3, BATCH_SAMPLES + 7, 2 * BATCH_SAMPLES + 11]
        .iter()
        .map(|&i| codes[i].clone())
        .collect();
    fit_campaign(
        &mut c,
        &Selection {
            samples: picked.clone(),
            ..Selection::default()
        },
        ModelChoice::One(ModelKind::VanGenuchten),
        &FitOptions::new(),
        &|_, _| {},
    )
    .expect("fit");
    for code in &picked {
        let id: i64 = c
            .connection()
            .query_row(
                "SELECT r.id FROM reading r JOIN sample m ON m.id = r.sample_id
                 WHERE m.code = ?1 ORDER BY r.h_cm LIMIT 1",
                [code],
                |r| r.get(0),
            )
            .expect("reading");
        flags::flag_manual(c.connection(), FlagTarget::Reading(id), "bench leak", None)
            .expect("flag");
    }
    let conn = c.connection();
    let at = chrono::Utc
        .with_ymd_and_hms(2030, 1, 2, 3, 4, 5)
        .single()
        .expect("time");
    let export = build_export(
        conn,
        &ExportOptions::new(tmp.path()).with_exported_at(at),
        &|_, _| {},
    )
    .expect("export");
    let text =
        |name: &str| String::from_utf8(export.file(name).expect(name).to_vec()).expect("utf-8");

    // The same campaign read whole and rendered whole.
    let snap = snapshot::read(conn, None, 100.0, None, &|_, _| {}).expect("snapshot");
    assert_eq!(snap.sample_count(), export.samples);
    let doc = CampaignDocument::new(&snap, at);
    assert_eq!(export.fingerprint, doc.fingerprint_sha256);
    assert!(
        text(CAMPAIGN_FILE) == schema::to_json(&doc).expect("json"),
        "campaign.json"
    );
    assert_eq!(
        text(PARAMETERS_FILE),
        tables::parameters_csv(&snap).expect("csv")
    );
    assert_eq!(
        text(PROFILES_FILE),
        tables::profiles_csv(&snap).expect("csv")
    );
    let mut sites = serde_json::to_string_pretty(&geojson::collection(&snap)).expect("geojson");
    sites.push('\n');
    assert_eq!(text(SITES_FILE), sites);
    let charts = snap
        .sites
        .iter()
        .map(|site| chart::site_chart(&snap, site))
        .collect::<Result<Vec<_>, _>>()
        .expect("charts");
    let page = html::report_html(
        &snap,
        html::PageMeta {
            exported_at: &doc.exported_at,
            fingerprint: &doc.fingerprint_sha256,
        },
        &charts,
    );
    assert!(text(REPORT_FILE) == page, "report.html");
    // The flags of every batch reached the page.
    assert_eq!(text(REPORT_FILE).matches("bench leak").count(), 3);
}
