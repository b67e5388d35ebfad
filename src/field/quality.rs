//! Quality marks on a logger series, found while it streams past: suction beyond the
//! tensiometer's working range, a stuck sensor, a spike, and a sign that breaks a sensor's
//! convention.
//!
//! Marks are suggestions for the review queue; the records themselves are always kept. A
//! [`SensorChecker`] sees one sensor's records in time order and holds only what the checks
//! need (the current run of equal values within the stuck span, the few records of an open
//! excursion), so memory does not grow with the length of the series.

use crate::model::domain::SensorKind;
use crate::model::number::significant;
use crate::model::units::{CM_PER_KPA, SuctionUnit};

use super::time::{span_text, utc_string};

/// Suction beyond which a tensiometer is marked, kPa: water in the cup cavitates somewhere
/// between 80 and 90 kPa (common practice).
pub const DEFAULT_TENSIOMETER_LIMIT_KPA: f64 = 85.0;
/// A sensor repeating the same value this long is marked stuck, seconds (6 h).
pub const DEFAULT_STUCK_SPAN_S: i64 = 6 * 3600;
/// A tensiometer jump of at least this much that comes back is a spike, kPa.
pub const DEFAULT_SPIKE_KPA: f64 = 10.0;
/// A water-content jump of at least this much that comes back is a spike, m3/m3.
pub const DEFAULT_SPIKE_THETA: f64 = 0.05;
/// A spike comes back within this many records; a longer excursion is a real change.
pub const DEFAULT_SPIKE_RECORDS: usize = 3;
/// A stuck run needs at least this many records as well as the span.
pub const STUCK_MIN_RECORDS: usize = 3;

/// How the reason of a stuck mark begins.
pub const STUCK_PREFIX: &str = "stuck sensor";
/// How the reason of a spike mark begins.
pub const SPIKE_PREFIX: &str = "spike";

/// Which check raised a mark.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub enum MarkKind {
    /// Tensiometer suction above its working range.
    BeyondRange,
    /// The same value for longer than the stuck span.
    Stuck,
    /// A jump that comes back within a few records.
    Spike,
    /// A tensiometer value whose sign is the opposite of the sensor's other values.
    SignFlip,
}

impl MarkKind {
    /// Every kind, in the order summaries list them.
    pub const ALL: [MarkKind; 4] = [
        MarkKind::BeyondRange,
        MarkKind::Stuck,
        MarkKind::Spike,
        MarkKind::SignFlip,
    ];

    /// A short label for summaries.
    pub fn label(self) -> &'static str {
        match self {
            MarkKind::BeyondRange => "beyond working range",
            MarkKind::Stuck => "stuck",
            MarkKind::Spike => "spike",
            MarkKind::SignFlip => "sign",
        }
    }

    /// Position in [`MarkKind::ALL`].
    pub fn index(self) -> usize {
        self as usize
    }
}

/// A suggested quality mark on one record.
#[derive(Debug, Clone, PartialEq)]
pub struct Mark {
    /// The check that raised it.
    pub kind: MarkKind,
    /// Why, with the values (stored as the flag's reason).
    pub reason: String,
    /// How far past the check's threshold (1 = at it; larger is worse).
    pub score: f64,
}

/// Thresholds of the checks; `None` turns a check off.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct QualitySettings {
    /// Tensiometer working range, suction head in cm.
    pub tensiometer_limit_cm: Option<f64>,
    /// Stuck span, seconds.
    pub stuck_span_s: Option<i64>,
    /// Spike jump for tensiometers, cm of suction head.
    pub spike_suction_cm: Option<f64>,
    /// Spike jump for water-content sensors, m3/m3.
    pub spike_theta: Option<f64>,
    /// Records within which a spike comes back.
    pub spike_records: usize,
}

impl Default for QualitySettings {
    fn default() -> Self {
        Self {
            tensiometer_limit_cm: Some(DEFAULT_TENSIOMETER_LIMIT_KPA * CM_PER_KPA),
            stuck_span_s: Some(DEFAULT_STUCK_SPAN_S),
            spike_suction_cm: Some(DEFAULT_SPIKE_KPA * CM_PER_KPA),
            spike_theta: Some(DEFAULT_SPIKE_THETA),
            spike_records: DEFAULT_SPIKE_RECORDS,
        }
    }
}

/// One `--spike` value: a jump for tensiometers, one for water-content sensors, or off.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum SpikeJump {
    /// Tensiometer jump, cm of suction head.
    Suction(f64),
    /// Water-content jump, m3/m3.
    Theta(f64),
    /// No spike check.
    Off,
}

/// Parse a spike jump: a suction with its unit (`10kpa`, `100cm`, `0.1bar`), a water content
/// (`0.05`, `0.05m3/m3`, `5%`), or `off`.
///
/// # Errors
/// A message naming the text and the accepted forms.
pub fn parse_spike(text: &str) -> Result<SpikeJump, String> {
    let t = text.trim();
    if t.eq_ignore_ascii_case("off") {
        return Ok(SpikeJump::Off);
    }
    let bad = || {
        format!(
            "found {t:?}, expected a jump such as 10kpa or 100cm (tensiometers), 0.05 or 5% \
             (water content), or off"
        )
    };
    let split = t
        .find(|c: char| !(c.is_ascii_digit() || c == '.'))
        .unwrap_or(t.len());
    let (number, unit) = t.split_at(split);
    let v: f64 = number.parse().map_err(|_| bad())?;
    if !(v.is_finite() && v > 0.0) {
        return Err(bad());
    }
    let unit = unit.trim().to_ascii_lowercase();
    Ok(match unit.as_str() {
        "" | "m3/m3" | "fraction" => {
            if v >= 1.0 {
                return Err(bad());
            }
            SpikeJump::Theta(v)
        }
        "%" | "percent" => SpikeJump::Theta(v / 100.0),
        other => match other.parse::<SuctionUnit>() {
            Ok(u) if u != SuctionUnit::Pf => SpikeJump::Suction(u.to_cm(v)),
            _ => return Err(bad()),
        },
    })
}

/// A value of a sensor for messages: suction in kPa, water content in m3/m3.
pub fn value_text(kind: SensorKind, value: f64) -> String {
    match kind {
        SensorKind::Tensiometer => format!(
            "{} kPa",
            significant(SuctionUnit::Kpa.from_cm(value), 4).unwrap_or_default()
        ),
        SensorKind::WaterContent => {
            format!("{} m3/m3", significant(value, 4).unwrap_or_default())
        }
    }
}

/// The current run of equal values.
#[derive(Debug)]
struct Run<H> {
    value: f64,
    start: i64,
    count: usize,
    /// Records of the run not yet marked (the run is shorter than the span so far).
    pending: Vec<H>,
    marked: bool,
}

/// The quality checks of one sensor, fed its records in time order.
#[derive(Debug)]
pub struct SensorChecker<H> {
    kind: SensorKind,
    settings: QualitySettings,
    /// Whether the sensor writes negative numbers (pressures), from its first non-zero value.
    negative: Option<bool>,
    run: Option<Run<H>>,
    /// The last value that was not part of an excursion.
    base: Option<f64>,
    /// Records since a jump, waiting to see whether the series comes back.
    excursion: Vec<(H, f64)>,
}

impl<H: Copy> SensorChecker<H> {
    /// Checks for a sensor of `kind`.
    pub fn new(kind: SensorKind, settings: QualitySettings) -> Self {
        Self {
            kind,
            settings,
            negative: None,
            run: None,
            base: None,
            excursion: Vec::new(),
        }
    }

    /// Feed the next record (in time order): its handle, time (s), canonical value (suction
    /// head cm, or theta m3/m3) and whether the file wrote it as a negative number. Marks
    /// found are appended to `out`; a spike is reported once the series has come back.
    pub fn push(
        &mut self,
        handle: H,
        time: i64,
        value: f64,
        written_negative: bool,
        out: &mut Vec<(H, Mark)>,
    ) {
        self.push_point(handle, value, written_negative, out);
        self.push_ordered(handle, time, value, out);
    }

    /// The checks of a single record, in any order: the working range and the sign.
    pub fn push_point(
        &mut self,
        handle: H,
        value: f64,
        written_negative: bool,
        out: &mut Vec<(H, Mark)>,
    ) {
        if self.kind == SensorKind::Tensiometer {
            self.check_range(handle, value, out);
            self.check_sign(handle, value, written_negative, out);
        }
    }

    /// The checks that need the series in time order: stuck and spike (their reasons start
    /// with [`STUCK_PREFIX`] and [`SPIKE_PREFIX`]).
    pub fn push_ordered(&mut self, handle: H, time: i64, value: f64, out: &mut Vec<(H, Mark)>) {
        self.check_stuck(handle, time, value, out);
        self.check_spike(handle, value, out);
    }

    fn check_range(&self, handle: H, h: f64, out: &mut Vec<(H, Mark)>) {
        if let Some(limit) = self.settings.tensiometer_limit_cm
            && h > limit
        {
            out.push((
                handle,
                Mark {
                    kind: MarkKind::BeyondRange,
                    reason: format!(
                        "tensiometer beyond working range ({} > {})",
                        value_text(self.kind, h),
                        value_text(self.kind, limit)
                    ),
                    score: h / limit,
                },
            ));
        }
    }

    fn check_sign(&mut self, handle: H, h: f64, negative: bool, out: &mut Vec<(H, Mark)>) {
        if h == 0.0 {
            return;
        }
        match self.negative {
            None => self.negative = Some(negative),
            Some(convention) if convention != negative => {
                let (written, others) = if negative {
                    ("-", "positive suctions")
                } else {
                    ("+", "negative pressures")
                };
                out.push((
                    handle,
                    Mark {
                        kind: MarkKind::SignFlip,
                        reason: format!(
                            "sign opposite to this sensor's other values ({written}{} among \
                             {others}): a positive pressure near saturation or a sign error; \
                             stored as suction {}",
                            value_text(self.kind, h),
                            value_text(self.kind, h)
                        ),
                        score: 1.0,
                    },
                ));
            }
            Some(_) => {}
        }
    }

    fn check_stuck(&mut self, handle: H, time: i64, value: f64, out: &mut Vec<(H, Mark)>) {
        let Some(span) = self.settings.stuck_span_s else {
            return;
        };
        let run = match &mut self.run {
            #[allow(clippy::float_cmp)] // a stuck sensor repeats the very same number
            Some(run) if run.value == value => run,
            _ => {
                self.run = Some(Run {
                    value,
                    start: time,
                    count: 1,
                    pending: vec![handle],
                    marked: false,
                });
                return;
            }
        };
        run.count += 1;
        let lasted = time - run.start;
        if lasted < span || run.count < STUCK_MIN_RECORDS {
            run.pending.push(handle);
            return;
        }
        let mark = Mark {
            kind: MarkKind::Stuck,
            reason: format!(
                "{STUCK_PREFIX}: the same value ({}) for at least {} (since {})",
                value_text(self.kind, value),
                span_text(span),
                utc_string(run.start)
            ),
            score: lasted as f64 / span as f64,
        };
        if !run.marked {
            run.marked = true;
            for h in run.pending.drain(..) {
                out.push((h, mark.clone()));
            }
            run.pending.shrink_to(16);
        }
        out.push((handle, mark));
    }

    fn check_spike(&mut self, handle: H, value: f64, out: &mut Vec<(H, Mark)>) {
        let jump = match self.kind {
            SensorKind::Tensiometer => self.settings.spike_suction_cm,
            SensorKind::WaterContent => self.settings.spike_theta,
        };
        let (Some(jump), Some(base)) = (jump, self.base) else {
            self.base = Some(value);
            return;
        };
        if self.excursion.is_empty() {
            if (value - base).abs() >= jump {
                self.excursion.push((handle, value));
            } else {
                self.base = Some(value);
            }
            return;
        }
        if (value - base).abs() < jump / 2.0 {
            let away = self
                .excursion
                .iter()
                .map(|(_, v)| v - base)
                .fold(0.0f64, |a, d| if d.abs() > a.abs() { d } else { a });
            let n = self.excursion.len();
            let reason = format!(
                "{SPIKE_PREFIX}: a jump of {}{} from {} that comes back within {n} record{}",
                if away < 0.0 { "-" } else { "+" },
                value_text(self.kind, away.abs()),
                value_text(self.kind, base),
                if n == 1 { "" } else { "s" }
            );
            for (h, _) in self.excursion.drain(..) {
                out.push((
                    h,
                    Mark {
                        kind: MarkKind::Spike,
                        reason: reason.clone(),
                        score: away.abs() / jump,
                    },
                ));
            }
            self.base = Some(value);
        } else if self.excursion.len() >= self.settings.spike_records {
            // Away for longer than a spike lasts: a real change of level.
            self.excursion.clear();
            self.base = Some(value);
        } else {
            self.excursion.push((handle, value));
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn run(kind: SensorKind, values: &[f64], step_s: i64) -> Vec<(usize, Mark)> {
        let mut c = SensorChecker::new(kind, QualitySettings::default());
        let mut out = Vec::new();
        for (i, &v) in values.iter().enumerate() {
            c.push(i, i as i64 * step_s, v.abs(), v < 0.0, &mut out);
        }
        out
    }

    fn kpa(v: f64) -> f64 {
        v * CM_PER_KPA
    }

    #[test]
    fn beyond_the_working_range() {
        let marks = run(SensorKind::Tensiometer, &[kpa(80.0), kpa(91.2)], 900);
        assert_eq!(marks.len(), 1);
        assert_eq!(marks[0].0, 1);
        assert_eq!(
            marks[0].1.reason,
            "tensiometer beyond working range (91.2 kPa > 85 kPa)"
        );
        assert!((marks[0].1.score - 91.2 / 85.0).abs() < 1e-12);
    }

    #[test]
    fn stuck_for_the_span_marks_the_whole_run() {
        // 15-minute records: 0.30 for 7 h (29 records), then it moves on.
        let mut values = vec![0.31, 0.305];
        values.extend(std::iter::repeat_n(0.30, 29));
        values.push(0.295);
        let marks = run(SensorKind::WaterContent, &values, 900);
        let stuck: Vec<usize> = marks
            .iter()
            .filter(|(_, m)| m.kind == MarkKind::Stuck)
            .map(|(i, _)| *i)
            .collect();
        assert_eq!(stuck, (2..31).collect::<Vec<_>>());
        assert!(marks[0].1.reason.starts_with(
            "stuck sensor: the same value (0.3 m3/m3) for at least 6 h (since 1970-01-01T00:30:00Z)"
        ));
        // 5.75 h of the same value is not stuck.
        let mut values = vec![0.31];
        values.extend(std::iter::repeat_n(0.30, 24));
        assert!(run(SensorKind::WaterContent, &values, 900).is_empty());
    }

    #[test]
    fn a_spike_comes_back_a_step_does_not() {
        let series = [0.20, 0.201, 0.199, 0.32, 0.30, 0.202, 0.2, 0.2];
        let marks = run(SensorKind::WaterContent, &series, 900);
        let spiked: Vec<usize> = marks.iter().map(|(i, _)| *i).collect();
        assert_eq!(spiked, vec![3, 4]);
        assert_eq!(
            marks[0].1.reason,
            "spike: a jump of +0.121 m3/m3 from 0.199 m3/m3 that comes back within 2 records"
        );
        assert!((marks[0].1.score - 0.121 / 0.05).abs() < 1e-9);
        // Rain: a rise that stays is a real change.
        let rain = [0.20, 0.2, 0.28, 0.30, 0.30, 0.29, 0.29, 0.28, 0.2];
        assert!(run(SensorKind::WaterContent, &rain, 900).is_empty());
    }

    #[test]
    fn a_sign_against_the_sensors_convention() {
        let marks = run(SensorKind::Tensiometer, &[-50.0, 0.0, -40.0, 3.0], 900);
        assert_eq!(marks.len(), 1);
        assert_eq!(marks[0].0, 3);
        assert_eq!(marks[0].1.kind, MarkKind::SignFlip);
        assert!(
            marks[0]
                .1
                .reason
                .contains("(+0.2942 kPa among negative pressures)")
        );
    }

    #[test]
    fn spike_jumps_parse_with_their_units() {
        assert_eq!(parse_spike("10kpa"), Ok(SpikeJump::Suction(kpa(10.0))));
        assert_eq!(parse_spike("100 cm"), Ok(SpikeJump::Suction(100.0)));
        assert_eq!(parse_spike("0.05"), Ok(SpikeJump::Theta(0.05)));
        assert_eq!(parse_spike("5%"), Ok(SpikeJump::Theta(0.05)));
        assert_eq!(parse_spike("OFF"), Ok(SpikeJump::Off));
        for bad in ["", "kpa", "5psi", "-3kpa", "1.5", "2pf"] {
            assert!(parse_spike(bad).is_err(), "{bad}");
        }
    }

    #[test]
    fn checks_can_be_turned_off() {
        let settings = QualitySettings {
            tensiometer_limit_cm: None,
            stuck_span_s: None,
            spike_suction_cm: None,
            spike_theta: None,
            spike_records: 3,
        };
        let mut c = SensorChecker::new(SensorKind::Tensiometer, settings);
        let mut out = Vec::new();
        for (i, v) in [kpa(95.0), kpa(95.0), kpa(95.0), kpa(5.0), kpa(95.0)]
            .into_iter()
            .enumerate()
        {
            c.push(i, i as i64 * 86_400, v, false, &mut out);
        }
        assert!(out.is_empty());
    }
}
