//! Wide logger exports: one time column, then one column per channel, read with a mapping
//! file (`--columns map.csv`: `column,site,depth_cm,sensor,sensor_id,unit`) that says what
//! each channel column holds.
//!
//! [`WideRows`] turns each wide row into one long-form record per mapped channel with a value
//! (an empty cell is no record), streaming, so the logger import checks and stores them as it
//! does the long form. Each record carries a header of its own in which every column is named
//! by the wide column it came from, so a problem reads `station.csv:7:T30_kPa: ...`.

use std::collections::HashMap;
use std::io::Read;

use super::diagnostic::Diagnostics;
use super::fields::{HeaderCheck, read_rows};
use super::logger::{RowUnit, SUCTION_UNITS, WATER_UNITS, row_unit};
use super::table::{Header, RecordError, Table, trim_cell};
use crate::model::domain::SensorKind;

/// The columns of a mapping file, for messages.
pub const MAP_COLUMNS: &str = "column,site,depth_cm,sensor,sensor_id,unit";

/// What one channel column of a wide file holds, as its mapping row says.
#[derive(Debug, Clone, PartialEq)]
pub struct Channel {
    /// The column's header name in the wide file.
    pub column: String,
    /// Site code.
    pub site: String,
    /// Depth as written in the map (checked), cm.
    pub depth_cm: String,
    /// `tensiometer` or `water_content`, as written.
    pub sensor: String,
    /// Sensor id.
    pub sensor_id: String,
    /// The values' unit, as written.
    pub unit: String,
    /// `map.csv:LINE` of its mapping row, for messages.
    pub place: String,
}

/// A mapping file read and checked: the channels, in its order.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct ChannelMap {
    /// The mapping file's name.
    pub file: String,
    /// One per mapped column.
    pub channels: Vec<Channel>,
}

impl ChannelMap {
    /// Read a mapping file (named `file` in messages), checking every cell as the long form
    /// checks its rows: codes, depth, sensor, a unit that suits the sensor, each column and
    /// each site's sensor id once.
    ///
    /// # Errors
    /// Every problem, as `map.csv:LINE:COLUMN: ...`.
    pub fn read(file: &str, reader: impl Read) -> Result<Self, Diagnostics> {
        let mut diags = Diagnostics::new();
        let mut table = Table::open(file, reader)?;
        let header = table.header().clone();
        let mut check = HeaderCheck::new(file, &header, MAP_COLUMNS, &mut diags);
        let c_column = check.required("column", &mut diags);
        let c_site = check.required("site", &mut diags);
        let c_depth = check.required("depth_cm", &mut diags);
        let c_sensor = check.required("sensor", &mut diags);
        let c_id = check.required("sensor_id", &mut diags);
        let c_unit = check.required("unit", &mut diags);
        let known = ["column", "site", "depth_cm", "sensor", "sensor_id", "unit"];
        let mut strict = Diagnostics::strict();
        check.unused(&known, &mut strict);
        diags.extend(strict);
        if !check.is_ok() || !diags.is_empty() {
            return Err(diags);
        }
        let mut channels: Vec<Channel> = Vec::new();
        let mut columns: HashMap<String, String> = HashMap::new();
        let mut sensors: HashMap<(String, String), String> = HashMap::new();
        let rows = read_rows(&mut table, &header, &mut diags, |cells| {
            let place = format!("{file}:{}", cells.line());
            let column = cells.code(c_column, "a column name of the wide file");
            let site = cells.code(c_site, "a site code");
            let _ = cells.depth(c_depth);
            let sensor_text = cells.cell(c_sensor).to_string();
            let kind = match sensor_text.parse::<SensorKind>() {
                Ok(k) => Some(k),
                Err(message) => {
                    cells.fail(c_sensor, message);
                    None
                }
            };
            let sensor_id = cells.code(c_id, "a sensor id");
            let unit_text = cells.cell(c_unit).to_string();
            match (kind, row_unit(&unit_text)) {
                (_, None) => cells.fail(
                    c_unit,
                    format!(
                        "found {unit_text:?}, expected a suction unit ({SUCTION_UNITS}) or a \
                         water-content unit ({WATER_UNITS})"
                    ),
                ),
                (Some(SensorKind::Tensiometer), Some(RowUnit::Fraction | RowUnit::Percent)) => {
                    cells.fail(
                        c_unit,
                        format!(
                            "found {unit_text:?} for a tensiometer, expected a suction unit \
                             ({SUCTION_UNITS})"
                        ),
                    );
                }
                (Some(SensorKind::WaterContent), Some(RowUnit::Suction(_))) => cells.fail(
                    c_unit,
                    format!(
                        "found {unit_text:?} for a water-content sensor, expected a \
                         water-content unit ({WATER_UNITS})"
                    ),
                ),
                _ => {}
            }
            let (Some(column), Some(site), Some(sensor_id)) = (column, site, sensor_id) else {
                return;
            };
            let key = column.to_ascii_lowercase();
            if let Some(first) = columns.get(&key) {
                cells.fail(
                    c_column,
                    format!(
                        "found the column {column:?} again (first at {first}), expected each \
                         column mapped once"
                    ),
                );
                return;
            }
            if let Some(first) = sensors.get(&(site.clone(), sensor_id.clone())) {
                cells.fail(
                    c_id,
                    format!(
                        "found sensor {sensor_id:?} of site {site:?} again (first at {first}), \
                         expected one column per sensor"
                    ),
                );
                return;
            }
            columns.insert(key, place.clone());
            sensors.insert((site.clone(), sensor_id.clone()), place.clone());
            if !cells.is_ok() {
                return;
            }
            channels.push(Channel {
                column,
                site,
                depth_cm: cells.cell(c_depth).to_string(),
                sensor: sensor_text,
                sensor_id,
                unit: unit_text,
                place,
            });
        });
        if rows == 0 {
            diags.push(
                file,
                1,
                "-",
                "found a header row and no data rows, expected one row per channel column",
            );
        }
        if diags.is_empty() {
            Ok(Self {
                file: file.to_string(),
                channels,
            })
        } else {
            Err(diags)
        }
    }
}

/// A mapped channel of one wide file: its column there and the header its records carry.
#[derive(Debug)]
struct WideChannel {
    index: usize,
    header: Header,
    channel: Channel,
}

/// A long-form record of a wide file: its line, the record, the header naming its columns and
/// its channel's index.
pub type IndexedRecord<'a> = (u64, &'a csv::StringRecord, &'a Header, usize);

/// The rows of a wide file as long-form records
/// (`site,depth_cm,sensor,sensor_id,time,value,unit`), one per mapped channel with a value.
pub struct WideRows<R: Read> {
    table: Table<R>,
    time: usize,
    width: usize,
    channels: Vec<WideChannel>,
    row: csv::StringRecord,
    line: u64,
    /// The next channel of `row` to give, or `channels.len()` when a new row is needed.
    next: usize,
    record: csv::StringRecord,
}

impl<R: Read> std::fmt::Debug for WideRows<R> {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("WideRows")
            .field("table", &self.table)
            .field("channels", &self.channels)
            .finish_non_exhaustive()
    }
}

impl<R: Read> WideRows<R> {
    /// Check a wide file's header against the map: its first column is the time, every
    /// mapped column must be there; a column neither time nor mapped is reported as not read
    /// (a warning, or a problem under `--strict`). `None` when the header has a problem.
    pub fn new(table: Table<R>, map: &ChannelMap, diags: &mut Diagnostics) -> Option<Self> {
        let file = table.file().to_string();
        let header = table.header().clone();
        let time = 0;
        let time_name = header.name(time).to_string();
        let mut names = vec![time_name.clone()];
        names.extend(map.channels.iter().map(|c| c.column.clone()));
        // What a header of this map looks like: the time first, then the mapped columns.
        let expected = names.join(",");
        let mut check = HeaderCheck::new(&file, &header, &expected, diags);
        check.mark_used(time);
        let mut channels = Vec::new();
        for channel in &map.channels {
            if let Some(index) = check.optional(&channel.column) {
                if index == time {
                    check.fail(
                        diags,
                        &channel.column,
                        format!(
                            "found the mapped column {:?} ({}) first, where the time belongs; \
                             expected the time column first",
                            channel.column, channel.place
                        ),
                    );
                    continue;
                }
                let names = [
                    &channel.column,
                    &channel.column,
                    &channel.column,
                    &channel.column,
                    &time_name,
                    &channel.column,
                    &channel.column,
                ];
                let names: Vec<&str> = names.iter().map(|s| s.as_str()).collect();
                channels.push(WideChannel {
                    index,
                    header: Header::new(&csv::StringRecord::from(names)),
                    channel: channel.clone(),
                });
            } else {
                check.fail(
                    diags,
                    "-",
                    format!(
                        "found no column {:?} in the header, which {} maps; expected the time \
                         first, then the mapped columns: {expected}",
                        channel.column, channel.place
                    ),
                );
            }
        }
        let mut known: Vec<&str> = map.channels.iter().map(|c| c.column.as_str()).collect();
        known.push("time");
        check.unused(&known, diags);
        if !check.is_ok() {
            return None;
        }
        let next = channels.len();
        Some(Self {
            table,
            time,
            width: header.names().len(),
            channels,
            row: csv::StringRecord::new(),
            line: 0,
            next,
            record: csv::StringRecord::new(),
        })
    }

    /// Leave the remaining channels of the current row (its time was bad: one problem is
    /// enough).
    pub fn skip_row(&mut self) {
        self.next = self.channels.len();
    }

    /// Byte offset reached in the input (for progress bars).
    pub fn bytes_read(&self) -> u64 {
        self.table.bytes_read()
    }

    /// Whether number cells may use a decimal comma (a semicolon-separated file).
    pub fn decimal_comma(&self) -> bool {
        self.table.decimal_comma()
    }

    /// The time column's header name.
    pub fn time_name(&self) -> &str {
        self.table.header().name(self.time)
    }

    /// The header each channel's records carry, in the order [`WideRows::next_indexed`]
    /// numbers the channels.
    pub fn headers(&self) -> impl Iterator<Item = &Header> {
        self.channels.iter().map(|c| &c.header)
    }

    /// The next long-form record, its line and the header naming its columns; `None` at
    /// the end.
    ///
    /// # Errors
    /// A row that cannot be read or has the wrong number of fields, with its line.
    pub fn next_record(
        &mut self,
    ) -> Option<Result<(u64, &csv::StringRecord, &Header), RecordError>> {
        self.next_indexed()
            .map(|r| r.map(|(line, record, header, _)| (line, record, header)))
    }

    /// [`WideRows::next_record`] with the index of the record's channel (see
    /// [`WideRows::headers`]).
    ///
    /// # Errors
    /// As [`WideRows::next_record`].
    pub fn next_indexed(&mut self) -> Option<Result<IndexedRecord<'_>, RecordError>> {
        loop {
            while self.next < self.channels.len() {
                let index = self.next;
                let ch = &self.channels[index];
                self.next += 1;
                let value = self.row.get(ch.index).map_or("", trim_cell);
                if value.is_empty() {
                    continue;
                }
                let c = &ch.channel;
                self.record.clear();
                for field in [
                    c.site.as_str(),
                    c.depth_cm.as_str(),
                    c.sensor.as_str(),
                    c.sensor_id.as_str(),
                    self.row.get(self.time).unwrap_or(""),
                    value,
                    c.unit.as_str(),
                ] {
                    self.record.push_field(field);
                }
                return Some(Ok((self.line, &self.record, &ch.header, index)));
            }
            match self.table.next_record()? {
                Err(e) => return Some(Err(e)),
                Ok((line, row)) => {
                    if row.len() != self.width {
                        return Some(Err((
                            line,
                            format!(
                                "found {} field{}, expected {} (one per header column)",
                                row.len(),
                                if row.len() == 1 { "" } else { "s" },
                                self.width
                            ),
                        )));
                    }
                    self.row.clone_from(row);
                    self.line = line;
                    self.next = 0;
                }
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    const MAP: &str = "column,site,depth_cm,sensor,sensor_id,unit\n\
        T30,LV,30,tensiometer,LV-T30,kPa\n\
        W30,LV,30,water_content,LV-W30,%\n";

    fn records(wide: &str) -> Vec<(u64, Vec<String>, String)> {
        let map = ChannelMap::read("map.csv", MAP.as_bytes()).expect("map");
        let table = Table::open("w.csv", wide.as_bytes()).expect("opens");
        let mut diags = Diagnostics::new();
        let mut rows = WideRows::new(table, &map, &mut diags).expect("header");
        let mut out = Vec::new();
        while let Some(r) = rows.next_record() {
            let (line, rec, header) = r.expect("record");
            out.push((
                line,
                rec.iter().map(str::to_string).collect(),
                header.name(5).to_string(),
            ));
        }
        out
    }

    #[test]
    fn each_mapped_value_becomes_a_long_record_named_by_its_column() {
        let got = records(
            "time,W30,other,T30\n2026-05-01T00:00:00Z,31.2,x,-12.5\n\n2026-05-01T01:00:00Z,,y,-12.7\n",
        );
        assert_eq!(got.len(), 3);
        assert_eq!(
            got[0].1,
            vec![
                "LV",
                "30",
                "tensiometer",
                "LV-T30",
                "2026-05-01T00:00:00Z",
                "-12.5",
                "kPa"
            ]
        );
        assert_eq!((got[0].0, got[0].2.as_str()), (2, "T30"));
        assert_eq!(
            (got[1].0, got[1].1[5].as_str(), got[1].2.as_str()),
            (2, "31.2", "W30")
        );
        // The empty W30 cell of line 4 is no record.
        assert_eq!((got[2].0, got[2].2.as_str()), (4, "T30"));
    }

    #[test]
    fn map_problems_are_placed_in_the_map() {
        let bad = "column,site,depth_cm,sensor,sensor_id,unit\n\
            T30,LV,30,tensiometer,LV-T30,%\n\
            T30,LV,40,tensiometer,LV-T40,kPa\n\
            W30,LV,-3,water_content,LV-W30,%\n";
        let err = ChannelMap::read("map.csv", bad.as_bytes())
            .expect_err("bad map")
            .to_string();
        assert!(
            err.contains("map.csv:2:unit: found \"%\" for a tensiometer"),
            "{err}"
        );
        assert!(
            err.contains("map.csv:3:column: found the column \"T30\" again (first at map.csv:2)"),
            "{err}"
        );
        assert!(err.contains("map.csv:4:depth_cm: found \"-3\""), "{err}");
    }

    #[test]
    fn a_mapped_column_missing_from_the_file_is_named() {
        let map = ChannelMap::read("map.csv", MAP.as_bytes()).expect("map");
        let table =
            Table::open("w.csv", "time,T30\n2026-05-01T00:00:00Z,1\n".as_bytes()).expect("opens");
        let mut diags = Diagnostics::new();
        assert!(WideRows::new(table, &map, &mut diags).is_none());
        assert!(
            diags
                .to_string()
                .contains("w.csv:1:-: found no column \"W30\" in the header, which map.csv:3 maps"),
            "{diags}"
        );
    }
}
