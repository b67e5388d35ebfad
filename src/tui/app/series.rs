//! The logger series screen's data: the sensors of the campaign, the time window shown, and
//! each plotted series thinned to a few buckets per column (min and max of the records in it),
//! so a season of a million records draws as fast as a day's.

use crate::model::domain::SensorKind;

/// The narrowest window the zoom goes to, seconds (6 h).
pub const MIN_WINDOW_S: i64 = 6 * 3600;
/// The window around a reviewed record, seconds either side (3 days).
pub const AROUND_S: i64 = 3 * 86_400;

/// A logger sensor with records, as the sensor list shows it.
#[derive(Debug, Clone, PartialEq)]
pub struct SensorInfo {
    /// Site code.
    pub site: String,
    /// The sensor's id within its site.
    pub sensor_id: String,
    /// Tensiometer or water content.
    pub kind: SensorKind,
    /// Depth below the surface, cm.
    pub depth_cm: f64,
    /// First and last record, seconds since 1970 UTC.
    pub first: i64,
    /// Last record.
    pub last: i64,
    /// Records with a live flag.
    pub flagged: usize,
}

/// What to load: the pair of series at one depth of a site, in a window.
#[derive(Debug, Clone, PartialEq)]
pub struct SeriesRequest {
    /// Site code.
    pub site: String,
    /// Depth, cm.
    pub depth_cm: f64,
    /// The sensor asked for; its partner of the other kind at the same depth comes with it.
    pub sensor_id: String,
    /// Time window (inclusive, seconds since 1970 UTC); `None` for everything logged there.
    pub window: Option<(i64, i64)>,
    /// Buckets across the window (about two per terminal column: braille has two dots a cell).
    pub columns: usize,
    /// A record to mark: its sensor's id and its time.
    pub mark: Option<(String, i64)>,
}

/// The records of one thinned bucket: first and last value in time, lowest and highest.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Envelope {
    /// Value of the bucket's first record.
    pub first: f64,
    /// Value of its last record.
    pub last: f64,
    /// Lowest value.
    pub min: f64,
    /// Highest value.
    pub max: f64,
    /// Records in it.
    pub count: u32,
}

impl Envelope {
    fn of(value: f64) -> Envelope {
        Envelope {
            first: value,
            last: value,
            min: value,
            max: value,
            count: 1,
        }
    }

    fn add(&mut self, value: f64) {
        self.last = value;
        self.min = self.min.min(value);
        self.max = self.max.max(value);
        self.count += 1;
    }
}

/// One column of a thinned series: records without and with live flags apart.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Bucket {
    /// Its index across the window (0 = the window's start).
    pub index: usize,
    /// Records without a live flag.
    pub values: Option<Envelope>,
    /// Records with a live flag (drawn with their own glyph, left out of the line).
    pub flagged: Option<Envelope>,
}

/// Thins a time-ordered series into buckets of equal time across a window.
#[derive(Debug, Clone)]
pub struct Thinner {
    from: i64,
    to: i64,
    columns: usize,
    buckets: Vec<Bucket>,
    records: usize,
    flagged: usize,
}

impl Thinner {
    /// Buckets for `window` (inclusive), at least one.
    pub fn new(window: (i64, i64), columns: usize) -> Thinner {
        Thinner {
            from: window.0,
            to: window.1.max(window.0),
            columns: columns.max(1),
            buckets: Vec::new(),
            records: 0,
            flagged: 0,
        }
    }

    /// The bucket a time falls in.
    pub fn index(&self, time: i64) -> usize {
        let span = (self.to - self.from + 1) as f64;
        let at = ((time - self.from) as f64 / span * self.columns as f64).floor();
        (at.max(0.0) as usize).min(self.columns - 1)
    }

    /// Add the next record (times in order); records outside the window are ignored.
    pub fn push(&mut self, time: i64, value: f64, flagged: bool) {
        if time < self.from || time > self.to || !value.is_finite() {
            return;
        }
        let index = self.index(time);
        if self.buckets.last().is_none_or(|b| b.index != index) {
            self.buckets.push(Bucket {
                index,
                values: None,
                flagged: None,
            });
        }
        let Some(bucket) = self.buckets.last_mut() else {
            return;
        };
        let slot = if flagged {
            &mut bucket.flagged
        } else {
            &mut bucket.values
        };
        match slot {
            Some(e) => e.add(value),
            None => *slot = Some(Envelope::of(value)),
        }
        self.records += 1;
        self.flagged += usize::from(flagged);
    }

    /// The buckets (non-empty ones, in time order) and the record counts: all, flagged.
    pub fn finish(self) -> (Vec<Bucket>, usize, usize) {
        (self.buckets, self.records, self.flagged)
    }
}

/// One plotted sensor in a window.
#[derive(Debug, Clone, PartialEq)]
pub struct SensorSeries {
    /// The sensor's id.
    pub sensor_id: String,
    /// Tensiometer (suction head, cm) or water content (m3/m3).
    pub kind: SensorKind,
    /// Records in the window.
    pub records: usize,
    /// Of those, with a live flag.
    pub flagged: usize,
    /// The thinned series.
    pub buckets: Vec<Bucket>,
    /// The marked record (time, value), when it is this sensor's.
    pub mark: Option<(i64, f64)>,
}

impl SensorSeries {
    /// Lowest and highest value in the window, flagged records included.
    pub fn range(&self) -> Option<(f64, f64)> {
        self.buckets
            .iter()
            .flat_map(|b| b.values.iter().chain(b.flagged.iter()))
            .map(|e| (e.min, e.max))
            .chain(self.mark.map(|(_, v)| (v, v)))
            .reduce(|a, b| (a.0.min(b.0), a.1.max(b.1)))
    }
}

/// The series of one depth in a window, as loaded for a request.
#[derive(Debug, Clone, PartialEq)]
pub struct SeriesData {
    /// What was asked for.
    pub request: SeriesRequest,
    /// The window shown (the request's, or everything logged at the depth).
    pub window: (i64, i64),
    /// Buckets across it.
    pub columns: usize,
    /// The tensiometer at the depth.
    pub suction: Option<SensorSeries>,
    /// The water-content sensor at the depth.
    pub water: Option<SensorSeries>,
}

impl SeriesData {
    /// The time at the middle of a bucket.
    pub fn bucket_time(&self, index: usize) -> f64 {
        let (from, to) = self.window;
        from as f64 + (index as f64 + 0.5) * (to - from + 1) as f64 / self.columns.max(1) as f64
    }
}

/// Where the series screen should land once the sensors are known.
#[derive(Debug, Clone, PartialEq)]
pub enum SensorPick {
    /// The first tensiometer (else any sensor) logging within this depth range, cm.
    Depth(f64, f64),
    /// This sensor.
    Sensor(String),
}

/// The series screen.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct SeriesState {
    /// Every sensor of the campaign, by site and sensor id.
    pub sensors: Vec<SensorInfo>,
    /// The sensors have been loaded at least once.
    pub loaded: bool,
    /// Why there are no sensors (the load failed), when so.
    pub unavailable: Option<String>,
    /// Site shown.
    pub site: Option<String>,
    /// Row of the site's sensor list.
    pub cursor: usize,
    /// Time window; `None` for everything logged at the depth.
    pub window: Option<(i64, i64)>,
    /// A record to mark: sensor id and time.
    pub mark: Option<(String, i64)>,
    /// Where to land once the sensors are loaded.
    pub pick: Option<SensorPick>,
    /// The request whose answer is wanted.
    pub wanted: Option<SeriesRequest>,
    /// The loaded series (for `wanted`).
    pub data: Option<SeriesData>,
}

impl SeriesState {
    /// The sensors of the site shown, in list order.
    pub fn site_sensors(&self) -> Vec<&SensorInfo> {
        self.sensors
            .iter()
            .filter(|s| Some(&s.site) == self.site.as_ref())
            .collect()
    }

    /// The sensor under the cursor.
    pub fn current(&self) -> Option<&SensorInfo> {
        self.site_sensors().get(self.cursor).copied()
    }

    /// Codes of the sites with sensors, in order.
    pub fn sites(&self) -> Vec<&str> {
        let mut out: Vec<&str> = Vec::new();
        for s in &self.sensors {
            if out.last() != Some(&s.site.as_str()) {
                out.push(&s.site);
            }
        }
        out
    }

    /// First and last record of every sensor at the current sensor's depth.
    pub fn depth_span(&self) -> Option<(i64, i64)> {
        let current = self.current()?;
        self.site_sensors()
            .iter()
            .filter(|s| (s.depth_cm - current.depth_cm).abs() < 1e-9)
            .map(|s| (s.first, s.last))
            .reduce(|a, b| (a.0.min(b.0), a.1.max(b.1)))
    }

    /// Put the cursor where `pick` says (unchanged when nothing matches).
    pub fn apply(&mut self, pick: &SensorPick) {
        let sensors = self.site_sensors();
        let found = match pick {
            SensorPick::Sensor(id) => sensors.iter().position(|s| s.sensor_id == *id),
            SensorPick::Depth(top, bottom) => {
                let within = |s: &&SensorInfo| s.depth_cm >= *top && s.depth_cm < *bottom;
                sensors
                    .iter()
                    .position(|s| within(s) && s.kind == SensorKind::Tensiometer)
                    .or_else(|| sensors.iter().position(within))
            }
        };
        if let Some(i) = found {
            self.cursor = i;
        }
    }
}

/// The window moved by `step` halves of its width (negative: earlier), kept inside `span`.
pub fn panned(window: (i64, i64), span: (i64, i64), step: i64) -> (i64, i64) {
    let width = window.1 - window.0;
    let shift = step * (width / 2).max(1);
    let from = (window.0 + shift).clamp(span.0, (span.1 - width).max(span.0));
    (from, from + width)
}

/// The window scaled about its middle by `factor` (0.5 zooms in), at least
/// [`MIN_WINDOW_S`] wide and kept inside `span`; `None` once it covers the whole span.
pub fn zoomed(window: (i64, i64), span: (i64, i64), factor: f64) -> Option<(i64, i64)> {
    let width = ((window.1 - window.0) as f64 * factor).round() as i64;
    let width = width.max(MIN_WINDOW_S);
    if width >= span.1 - span.0 {
        return None;
    }
    let middle = window.0 + (window.1 - window.0) / 2;
    let from = (middle - width / 2).clamp(span.0, span.1 - width);
    Some((from, from + width))
}

#[cfg(test)]
mod tests {
    #![allow(clippy::float_cmp)]

    use super::*;

    #[test]
    fn a_million_records_thin_to_the_columns_with_flags_apart() {
        let mut t = Thinner::new((0, 999_999), 100);
        for i in 0..1_000_000 {
            let flagged = i == 123_456;
            let v = if flagged { 99.0 } else { (i % 10_000) as f64 };
            t.push(i, v, flagged);
        }
        t.push(2_000_000, 5.0, false); // outside the window
        let (buckets, records, flagged) = t.finish();
        assert_eq!((buckets.len(), records, flagged), (100, 1_000_000, 1));
        assert!(buckets.windows(2).all(|w| w[0].index + 1 == w[1].index));
        let b = buckets[12];
        let e = b.values.expect("values");
        assert_eq!((e.first, e.last, e.min, e.max), (0.0, 9999.0, 0.0, 9999.0));
        assert_eq!(e.count, 9_999);
        assert_eq!(b.flagged.map(|f| (f.min, f.count)), Some((99.0, 1)));
    }

    #[test]
    fn pan_and_zoom_stay_inside_the_span() {
        let span = (0, 100 * 86_400);
        let w = (10 * 86_400, 20 * 86_400);
        assert_eq!(panned(w, span, 1), (15 * 86_400, 25 * 86_400));
        assert_eq!(panned(w, span, -10), (0, 10 * 86_400));
        assert_eq!(panned(w, span, 1000), (90 * 86_400, 100 * 86_400));
        assert_eq!(
            zoomed(w, span, 0.5),
            Some((12 * 86_400 + 43_200, 17 * 86_400 + 43_200))
        );
        assert_eq!(
            zoomed((0, 3600), span, 0.5),
            Some((0, MIN_WINDOW_S)),
            "no narrower than 6 h"
        );
        assert_eq!(zoomed(w, span, 16.0), None, "the whole span again");
    }

    fn sensor(site: &str, id: &str, kind: SensorKind, depth: f64) -> SensorInfo {
        SensorInfo {
            site: site.into(),
            sensor_id: id.into(),
            kind,
            depth_cm: depth,
            first: 0,
            last: 100,
            flagged: 0,
        }
    }

    #[test]
    fn a_pick_lands_on_the_tensiometer_of_the_layer() {
        let mut s = SeriesState {
            sensors: vec![
                sensor("A", "T15", SensorKind::Tensiometer, 15.0),
                sensor("A", "W15", SensorKind::WaterContent, 15.0),
                sensor("A", "W45", SensorKind::WaterContent, 45.0),
                sensor("A", "T45", SensorKind::Tensiometer, 45.0),
                sensor("B", "X", SensorKind::Tensiometer, 10.0),
            ],
            site: Some("A".into()),
            ..SeriesState::default()
        };
        assert_eq!(s.sites(), ["A", "B"]);
        s.apply(&SensorPick::Depth(25.0, 60.0));
        assert_eq!(s.current().map(|c| c.sensor_id.as_str()), Some("T45"));
        s.apply(&SensorPick::Sensor("W15".into()));
        assert_eq!(s.cursor, 1);
        s.apply(&SensorPick::Depth(80.0, 90.0));
        assert_eq!(s.cursor, 1, "nothing there: the cursor stays");
        assert_eq!(s.depth_span(), Some((0, 100)));
    }
}
