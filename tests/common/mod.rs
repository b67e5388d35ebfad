//! Shared helpers for the integration tests: the real binary, temporary campaigns, row counts.

#![allow(dead_code)] // each test crate uses a different subset

use std::path::{Path, PathBuf};

use assert_cmd::Command;
use rusqlite::Connection;
use tempfile::TempDir;

/// The tables whose row counts a failed import must leave unchanged.
pub const TABLES: [&str; 11] = [
    "campaign",
    "import_batch",
    "site",
    "layer",
    "sample",
    "reading",
    "logger_sensor",
    "logger_record",
    "flag",
    "flag_event",
    "fit",
];

/// The fixture directory (`tests/data`); commands run there so file names in messages are
/// short and stable (`invalid/empty.csv`).
pub fn data_dir() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("tests")
        .join("data")
}

/// The porewise binary, run in the fixture directory.
pub fn porewise() -> Command {
    let mut cmd = Command::new(env!("CARGO_BIN_EXE_porewise"));
    cmd.current_dir(data_dir());
    cmd
}

/// A temporary directory with a fresh campaign file made by `porewise init`.
pub struct Scratch {
    /// Kept alive for the test's duration.
    pub dir: TempDir,
    /// The campaign file.
    pub db: PathBuf,
}

impl Scratch {
    /// Create the directory and run `porewise init` in it.
    pub fn new() -> Self {
        let dir = tempfile::tempdir().expect("temp dir");
        let db = dir.path().join("campaign.sqlite");
        porewise()
            .arg("init")
            .arg(&db)
            .args(["--name", "Test campaign"])
            .assert()
            .success();
        Self { dir, db }
    }

    /// Run `porewise import KIND DB FILES... EXTRA...` from the fixture directory.
    pub fn import(&self, kind: &str, files: &[&str], extra: &[&str]) -> assert_cmd::assert::Assert {
        porewise()
            .arg("import")
            .arg(kind)
            .arg(&self.db)
            .args(files)
            .args(extra)
            .assert()
    }

    /// Run `porewise import KIND DB FILES... EXTRA...` and require a refusal: exit 1, each of
    /// `expected` and the count of `problems` on stderr, nothing on stdout, no panic, and no
    /// row count of the campaign changed.
    pub fn refused(
        &self,
        kind: &str,
        files: &[&str],
        extra: &[&str],
        expected: &[&str],
        problems: usize,
    ) {
        let before = self.counts();
        let assert = self.import(kind, files, extra).code(1);
        let err = stderr(&assert);
        for e in expected {
            assert!(err.contains(e), "expected {e:?} in stderr:\n{err}");
        }
        let noun = if problems == 1 { "problem" } else { "problems" };
        assert!(
            err.contains(&format!("{problems} {noun} found; nothing was written")),
            "expected {problems} {noun} in stderr:\n{err}"
        );
        assert!(!err.contains("panicked"), "{err}");
        assert!(stdout(&assert).is_empty());
        assert_eq!(
            self.counts(),
            before,
            "a refused import changed the campaign"
        );
    }

    /// Import and require success.
    pub fn import_ok(&self, kind: &str, files: &[&str]) {
        self.import(kind, files, &[]).success();
    }

    /// Run `porewise list DB ARGS...` and return stdout (requires success).
    pub fn list(&self, args: &[&str]) -> String {
        let out = porewise()
            .arg("list")
            .arg(&self.db)
            .args(args)
            .assert()
            .success();
        String::from_utf8(out.get_output().stdout.clone()).expect("utf-8")
    }

    /// A plain connection to the campaign file (no porewise code involved).
    pub fn connect(&self) -> Connection {
        Connection::open(&self.db).expect("open campaign")
    }

    /// Rows in every table of [`TABLES`].
    pub fn counts(&self) -> Vec<(String, i64)> {
        let conn = self.connect();
        TABLES
            .iter()
            .map(|t| {
                let n: i64 = conn
                    .query_row(&format!("SELECT count(*) FROM {t}"), [], |r| r.get(0))
                    .expect("count");
                ((*t).to_string(), n)
            })
            .collect()
    }

    /// Rows in one table.
    pub fn count(&self, table: &str) -> i64 {
        self.connect()
            .query_row(&format!("SELECT count(*) FROM {table}"), [], |r| r.get(0))
            .expect("count")
    }

    /// Write a file into the scratch directory and return its absolute path as text.
    pub fn write(&self, name: &str, text: &str) -> String {
        let path = self.dir.path().join(name);
        std::fs::write(&path, text).expect("write fixture");
        path.display().to_string()
    }
}

/// stderr of a finished command as text.
pub fn stderr(assert: &assert_cmd::assert::Assert) -> String {
    String::from_utf8(assert.get_output().stderr.clone()).expect("utf-8")
}

/// stdout of a finished command as text.
pub fn stdout(assert: &assert_cmd::assert::Assert) -> String {
    String::from_utf8(assert.get_output().stdout.clone()).expect("utf-8")
}

/// The porewise binary as a plain `std` command (for runs the test must watch or stop).
pub fn porewise_std() -> std::process::Command {
    let mut cmd = std::process::Command::new(env!("CARGO_BIN_EXE_porewise"));
    cmd.current_dir(data_dir());
    cmd
}

/// Suctions of a generated lab sheet, cm (common practice: hanging column, sandbox,
/// pressure plates).
pub const LAB_SUCTIONS_CM: [f64; 8] = [0.0, 10.0, 30.0, 100.0, 330.0, 1000.0, 3000.0, 15000.0];

/// A generated lab sheet: `sites` sites `G000`.., three 20 cm layers each, `per_site` samples
/// a site spread over the layers, every sample read at `suctions` cm. Water contents follow
/// van Genuchten curves whose parameters step with the sample's number (theta_r 0.02-0.10,
/// theta_s 0.36-0.48, alpha 0.005-0.08 1/cm, n 1.2-2.4: invented, within the usual range of
/// mineral soils, common practice) plus a fixed +-0.004 scatter pattern, so the sheet is the
/// same on every run and every sample can be fitted.
pub fn lab_sheet(sites: usize, per_site: usize, suctions: &[f64]) -> String {
    use std::fmt::Write as _;
    let vg = porewise::model::retention::ModelKind::VanGenuchten.curve();
    let mut text = String::from("site,top_cm,bottom_cm,sample,method,suction_cm,theta\n");
    for site in 0..sites {
        for k in 0..per_site {
            let n = site * per_site + k;
            let step = |period: usize| (n % period) as f64 / period as f64;
            let p = [
                0.02 + 0.08 * step(7),
                0.36 + 0.12 * step(5),
                0.005 * 16f64.powf(step(11)),
                1.2 + 1.2 * step(13),
            ];
            let top = 20 * (k % 3);
            for (i, h) in suctions.iter().enumerate() {
                let scatter = [0.004, -0.003, 0.001, -0.004, 0.002, -0.001][(i + n) % 6];
                let _ = writeln!(
                    text,
                    "G{site:03},{top},{},G{site:03}-S{k:05},pressure plate,{h},{:.5}",
                    top + 20,
                    vg.value(*h, &p) + scatter
                );
            }
        }
    }
    text
}
