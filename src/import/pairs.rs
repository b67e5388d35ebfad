//! The plain pairs file for a stateless fit: `sample,suction_<unit>,theta` (or `theta_pct`).
//!
//! Other columns are ignored. Comma or semicolon separated (see [`Table`]). Every reading keeps
//! its physical line so a later message can point at it. Suctions are converted to cm and
//! water contents to fractions.

use std::collections::HashMap;
use std::io::Read;
use std::path::Path;

use super::diagnostic::Diagnostics;
use super::table::{Table, number_text, parse_number};
use crate::model::units::{SuctionUnit, WaterUnit};

/// One reading of a pairs file, in canonical units.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PairReading {
    /// Suction head, cm.
    pub h_cm: f64,
    /// Volumetric water content, m3/m3.
    pub theta: f64,
    /// Physical line in the file (the header is line 1).
    pub line: u64,
}

/// The readings of one sample, in file order.
#[derive(Debug, Clone, PartialEq)]
pub struct PairSample {
    /// The sample's name as written.
    pub name: String,
    /// Its readings.
    pub readings: Vec<PairReading>,
}

impl PairSample {
    /// Suctions (cm) of the readings.
    pub fn suctions(&self) -> Vec<f64> {
        self.readings.iter().map(|r| r.h_cm).collect()
    }

    /// Water contents (m3/m3) of the readings.
    pub fn thetas(&self) -> Vec<f64> {
        self.readings.iter().map(|r| r.theta).collect()
    }
}

/// A whole pairs file: samples in order of first appearance.
#[derive(Debug, Clone, PartialEq)]
pub struct PairsFile {
    /// The samples.
    pub samples: Vec<PairSample>,
    /// The suction unit the file was written in.
    pub suction_unit: SuctionUnit,
    /// The water-content unit the file was written in.
    pub water_unit: WaterUnit,
}

/// Read a pairs file from disk.
///
/// # Errors
/// Every problem found, placed at `FILE:LINE:COLUMN`.
pub fn read_pairs_path(path: &Path) -> Result<PairsFile, Diagnostics> {
    let name = path.display().to_string();
    match std::fs::File::open(path) {
        Ok(f) => read_pairs(&name, f),
        Err(e) => {
            let mut d = Diagnostics::new();
            d.push(&name, 0, "-", format!("cannot open the file: {e}"));
            Err(d)
        }
    }
}

/// The header's column positions.
struct Columns {
    sample: usize,
    suction: (usize, SuctionUnit),
    water: (usize, WaterUnit),
}

fn find_columns(table: &Table<impl Read>) -> Result<Columns, Diagnostics> {
    let file = table.file();
    let header = table.header();
    let mut problems = Diagnostics::new();
    let sample = header.find("sample");
    if sample.is_none() {
        problems.push(file, 1, "sample", "no `sample` column in the header");
    }
    let mut suction = None;
    let mut water = None;
    for (i, name) in header.names().iter().enumerate() {
        match SuctionUnit::from_column(name) {
            Some(Ok(unit)) if suction.is_none() => suction = Some((i, unit)),
            Some(Ok(_)) => problems.push(
                file,
                1,
                name,
                "a second suction column; expected exactly one suction_<unit> or pf column",
            ),
            Some(Err(suffix)) => problems.push(
                file,
                1,
                name,
                format!(
                    "unknown suction unit {suffix:?}; expected suction_cm, suction_hpa, suction_kpa, suction_mpa, suction_bar or pf"
                ),
            ),
            None => {}
        }
        match WaterUnit::from_column(name) {
            Some(Ok(WaterUnit::Gravimetric)) => problems.push(
                file,
                1,
                name,
                "gravimetric water content needs a bulk density; give theta or theta_pct here",
            ),
            Some(Ok(unit)) if water.is_none() => water = Some((i, unit)),
            Some(Ok(_)) => problems.push(
                file,
                1,
                name,
                "a second water-content column; expected exactly one of theta, theta_pct",
            ),
            Some(Err(suffix)) => problems.push(
                file,
                1,
                name,
                format!("unknown water-content unit {suffix:?}; expected theta or theta_pct"),
            ),
            None => {}
        }
    }
    if suction.is_none()
        && !problems
            .items()
            .iter()
            .any(|d| d.column.starts_with("suction"))
    {
        problems.push(
            file,
            1,
            "-",
            "no suction column; expected one of suction_cm, suction_hpa, suction_kpa, suction_mpa, suction_bar, pf",
        );
    }
    if water.is_none()
        && !problems
            .items()
            .iter()
            .any(|d| d.column.starts_with("theta"))
    {
        problems.push(
            file,
            1,
            "-",
            "no water-content column; expected theta or theta_pct",
        );
    }
    match (sample, suction, water) {
        (Some(sample), Some(suction), Some(water)) if problems.is_empty() => Ok(Columns {
            sample,
            suction,
            water,
        }),
        _ => Err(problems),
    }
}

/// Read a pairs file from any reader (named `file` in messages).
///
/// # Errors
/// Every problem found (up to the diagnostics cap), placed at `FILE:LINE:COLUMN`: missing or
/// unknown columns, empty or non-numeric cells, negative suctions, water contents outside
/// 0..1 (or 0..100 %), a file with no data rows.
pub fn read_pairs<R: Read>(file: &str, reader: R) -> Result<PairsFile, Diagnostics> {
    let mut table = Table::open(file, reader)?;
    let cols = find_columns(&table)?;
    let header = table.header().clone();
    let col_name = |i: usize| header.name(i).to_string();
    let (sample_col, suction_col, water_col) = (
        col_name(cols.sample),
        col_name(cols.suction.0),
        col_name(cols.water.0),
    );
    let mut problems = Diagnostics::new();
    let mut samples: Vec<PairSample> = Vec::new();
    let mut index: HashMap<String, usize> = HashMap::new();
    let max_water = cols.water.1.max_value().unwrap_or(f64::INFINITY);
    // Whether this file writes decimal commas (semicolon-separated files may).
    let decimal_comma = table.number("0,5").is_ok();
    while let Some(record) = table.next_record() {
        if problems.is_full() {
            break;
        }
        let (line, rec) = match record {
            Ok(r) => r,
            Err((line, message)) => {
                problems.push(file, line, "-", message);
                continue;
            }
        };
        let field = |i: usize| rec.get(i).map(str::trim);
        let name = match field(cols.sample) {
            Some(s) if !s.is_empty() => s.to_string(),
            _ => {
                problems.push(
                    file,
                    line,
                    &sample_col,
                    "found an empty cell, expected a sample name",
                );
                String::new()
            }
        };
        let number = |i: usize, column: &str, problems: &mut Diagnostics| match field(i) {
            None => {
                problems.push(file, line, column, "the row ends before this column");
                None
            }
            Some(text) => match parse_number(text, decimal_comma) {
                Ok(v) => Some(v),
                Err(message) => {
                    problems.push(file, line, column, message);
                    None
                }
            },
        };
        // In a pF column `-inf` is saturation (0 cm); every suction is converted from its
        // decimal text, rounded once (as the lab import does).
        let unit = cols.suction.1;
        let saturated = unit == SuctionUnit::Pf
            && field(cols.suction.0).is_some_and(|t| t.eq_ignore_ascii_case("-inf"));
        let suction = if saturated {
            Some(f64::NEG_INFINITY)
        } else {
            number(cols.suction.0, &suction_col, &mut problems)
        };
        let water = number(cols.water.0, &water_col, &mut problems);
        let h_cm = suction.map(|v| match field(cols.suction.0) {
            _ if saturated => 0.0,
            Some(text) => unit
                .decimal_to_cm(&number_text(text, decimal_comma))
                .unwrap_or_else(|| unit.to_cm(v)),
            None => unit.to_cm(v),
        });
        if let (Some(h), Some(v)) = (h_cm, suction)
            && h < 0.0
        {
            problems.push(
                file,
                line,
                &suction_col,
                format!("found {v}, a negative suction; expected 0 or more (suction is positive when drier)"),
            );
        }
        if let Some(w) = water
            && !(0.0..=max_water).contains(&w)
        {
            problems.push(
                file,
                line,
                &water_col,
                format!("found {w}, expected a water content between 0 and {max_water}"),
            );
        }
        let (Some(h_cm), Some(w)) = (h_cm, water) else {
            continue;
        };
        if name.is_empty() || h_cm < 0.0 || !(0.0..=max_water).contains(&w) {
            continue;
        }
        let theta = cols.water.1.to_fraction(w, None).unwrap_or(w);
        let k = *index.entry(name.clone()).or_insert_with(|| {
            samples.push(PairSample {
                name,
                readings: Vec::new(),
            });
            samples.len() - 1
        });
        samples[k].readings.push(PairReading { h_cm, theta, line });
    }
    if problems.is_empty() && samples.is_empty() {
        problems.push(file, 2, "-", "no data rows after the header");
    }
    if problems.is_empty() {
        Ok(PairsFile {
            samples,
            suction_unit: cols.suction.1,
            water_unit: cols.water.1,
        })
    } else {
        Err(problems)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn pf_minus_infinity_is_saturation_and_values_round_once() {
        let text = "sample,pf,theta\nA,-inf,0.41\nA,2,0.3\nA,-INF,0.4\n";
        let file = read_pairs("p.csv", text.as_bytes()).expect("reads");
        assert_eq!(file.samples[0].suctions(), vec![0.0, 100.0, 0.0]);
        let text = "sample,suction_kpa,theta\nA,33,0.3\nA,-inf,0.4\n";
        let err = read_pairs("p.csv", text.as_bytes())
            .expect_err("no -inf in kPa")
            .to_string();
        assert!(
            err.contains("p.csv:3:suction_kpa: found \"-inf\", expected a finite number"),
            "{err}"
        );
        // 33 kPa is stored as the double nearest 33 x 10^7 / 980665 cm (the same as the lab
        // import), within 1e-9 of the reference notes' 336.5063503 cm (table T10).
        let text = "sample,suction_kpa,theta\nA,33,0.3\n";
        let h = read_pairs("p.csv", text.as_bytes()).expect("reads").samples[0].suctions()[0];
        assert_eq!(Some(h), SuctionUnit::Kpa.decimal_to_cm("33"));
        assert!((h / 336.506_350_3 - 1.0).abs() < 1e-9);
    }

    #[test]
    fn reads_units_groups_samples_and_keeps_lines() {
        let text = "site;sample;suction_kpa;theta_pct\nX;A;0;41,0\nX;B;10;30\n\nX;A;1500;10,5\n";
        let f = read_pairs("p.csv", text.as_bytes()).unwrap();
        assert_eq!(f.samples.len(), 2);
        let a = &f.samples[0];
        assert_eq!(a.name, "A");
        assert_eq!(a.readings.len(), 2);
        assert_eq!(a.readings[1].line, 5);
        assert!((a.readings[1].h_cm - 15_295.743_19).abs() < 1e-4);
        assert!((a.readings[0].theta - 0.41).abs() < 1e-15);
        assert_eq!(f.water_unit, WaterUnit::Percent);
    }

    #[test]
    fn bad_cells_are_placed() {
        let text = "sample,suction_cm,theta\nA,10,0.3\nA,abc,0.2\nA,-5,1.2\n,3,0.1\n";
        let err = read_pairs("p.csv", text.as_bytes())
            .unwrap_err()
            .to_string();
        assert!(
            err.contains("p.csv:3:suction_cm: found \"abc\", expected a number"),
            "{err}"
        );
        assert!(
            err.contains("p.csv:4:suction_cm: found -5, a negative suction"),
            "{err}"
        );
        assert!(err.contains("p.csv:4:theta: found 1.2"), "{err}");
        assert!(err.contains("p.csv:5:sample: found an empty cell"), "{err}");
    }

    #[test]
    fn header_problems() {
        let err = read_pairs("p.csv", "sample,suction_psi,theta\nA,1,0.3\n".as_bytes())
            .unwrap_err()
            .to_string();
        assert!(
            err.contains("p.csv:1:suction_psi: unknown suction unit \"psi\""),
            "{err}"
        );
        let err = read_pairs("p.csv", "sample,theta\nA,0.3\n".as_bytes())
            .unwrap_err()
            .to_string();
        assert!(err.contains("p.csv:1:-: no suction column"), "{err}");
        let err = read_pairs("p.csv", "sample,pf,theta\n".as_bytes())
            .unwrap_err()
            .to_string();
        assert!(err.contains("no data rows"), "{err}");
    }
}
