//! The campaign's domain values: sites, layers, samples, readings and flags.
//!
//! Plain data in canonical units (suction head in cm, water content in m3/m3, depths in cm
//! below the surface). The store maps them to SQLite and the importers build them from files;
//! nothing here knows about either.

use std::fmt;
use std::str::FromStr;

use chrono::{DateTime, NaiveDate, Utc};
use serde::{Deserialize, Serialize};

/// Declares a fieldless enum stored and written as fixed lower-case words.
///
/// Generates `ALL`, `as_str`, `Display` and a `FromStr` whose error lists the accepted words.
macro_rules! text_enum {
    ($(#[$meta:meta])* $name:ident, $what:literal { $($(#[$vmeta:meta])* $variant:ident => $text:literal),+ $(,)? }) => {
        $(#[$meta])*
        #[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize)]
        pub enum $name {
            $($(#[$vmeta])* #[serde(rename = $text)] $variant),+
        }

        impl $name {
            /// Every value, in declaration order.
            pub const ALL: &'static [$name] = &[$($name::$variant),+];

            /// The word used in files, in the database and on screen.
            pub fn as_str(self) -> &'static str {
                match self {
                    $($name::$variant => $text),+
                }
            }
        }

        impl fmt::Display for $name {
            fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
                f.write_str(self.as_str())
            }
        }

        impl FromStr for $name {
            type Err = String;

            fn from_str(s: &str) -> Result<Self, Self::Err> {
                let t = s.trim();
                $(if t.eq_ignore_ascii_case($text) {
                    return Ok($name::$variant);
                })+
                let words: Vec<&str> = $name::ALL.iter().map(|v| v.as_str()).collect();
                Err(format!(
                    "found {:?}, expected {} ({})",
                    s.trim(),
                    $what,
                    words.join(", ")
                ))
            }
        }
    };
}

/// A stable unique identifier (UUID v4, hyphenated lower case) that survives merging two
/// campaign files, beside the integer keys that are local to one file.
#[derive(Debug, Clone, PartialEq, Eq, Hash, PartialOrd, Ord, Serialize, Deserialize)]
#[serde(transparent)]
pub struct Uid(String);

impl Uid {
    /// A fresh random identifier (UUID version 4).
    ///
    /// The 122 random bits come from the thread-local generator of `rand` (seeded from the
    /// operating system), which is much cheaper per call than a system call per identifier
    /// when an import makes a hundred thousand of them.
    pub fn random() -> Self {
        let uuid = uuid::Builder::from_random_bytes(rand::random()).into_uuid();
        Self(uuid.hyphenated().to_string())
    }

    /// Wrap an identifier read back from storage.
    ///
    /// # Errors
    /// The text is not a hyphenated UUID.
    pub fn parse(text: &str) -> Result<Self, String> {
        uuid::Uuid::try_parse(text)
            .map(|u| Self(u.hyphenated().to_string()))
            .map_err(|_| format!("found {text:?}, expected a UUID"))
    }

    /// The identifier as text.
    pub fn as_str(&self) -> &str {
        &self.0
    }
}

impl fmt::Display for Uid {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.0)
    }
}

/// A sampling site: one soil profile at a place.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Site {
    /// The short code other commands take (unique in a campaign).
    pub code: String,
    /// A descriptive name.
    pub name: Option<String>,
    /// WGS 84 latitude in decimal degrees, -90..90.
    pub latitude: Option<f64>,
    /// WGS 84 longitude in decimal degrees, -180..180.
    pub longitude: Option<f64>,
    /// Elevation above sea level, m.
    pub elevation_m: Option<f64>,
    /// Free text.
    pub notes: Option<String>,
    /// Stable identifier.
    pub uid: Uid,
}

impl Site {
    /// A site known only by its code (as a lab file names it), the rest left empty.
    pub fn with_code(code: impl Into<String>) -> Self {
        Self {
            code: code.into(),
            name: None,
            latitude: None,
            longitude: None,
            elevation_m: None,
            notes: None,
            uid: Uid::random(),
        }
    }
}

/// Which layer of which site: the site code and the depth range, in cm below the surface.
///
/// A layer has no code of its own; it is written `SITE:TOP-BOTTOM` (for example `LV:0-20`).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct LayerRef {
    /// Code of the site.
    pub site: String,
    /// Upper boundary, cm below the surface.
    pub top_cm: f64,
    /// Lower boundary, cm below the surface (deeper than the top).
    pub bottom_cm: f64,
}

impl LayerRef {
    /// A key for hash maps: the site and the exact bit patterns of both depths (-0 taken as 0).
    pub fn key(&self) -> (String, u64, u64) {
        (
            self.site.clone(),
            (self.top_cm + 0.0).to_bits(),
            (self.bottom_cm + 0.0).to_bits(),
        )
    }

    /// Whether two references name the same layer (the same comparison as [`LayerRef::key`]).
    pub fn same_as(&self, other: &LayerRef) -> bool {
        self.site == other.site
            && (self.top_cm + 0.0).to_bits() == (other.top_cm + 0.0).to_bits()
            && (self.bottom_cm + 0.0).to_bits() == (other.bottom_cm + 0.0).to_bits()
    }
}

impl fmt::Display for LayerRef {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}:{}-{}", self.site, self.top_cm, self.bottom_cm)
    }
}

impl FromStr for LayerRef {
    type Err = String;

    /// Parse `SITE:TOP-BOTTOM`, as listings print it.
    fn from_str(s: &str) -> Result<Self, Self::Err> {
        let bad = || format!("found {s:?}, expected a layer as SITE:TOP-BOTTOM (e.g. LV:0-20)");
        let (site, depths) = s.trim().rsplit_once(':').ok_or_else(bad)?;
        let (top, bottom) = depths.split_once('-').ok_or_else(bad)?;
        let top_cm: f64 = top.trim().parse().map_err(|_| bad())?;
        let bottom_cm: f64 = bottom.trim().parse().map_err(|_| bad())?;
        if site.is_empty() || !top_cm.is_finite() || !bottom_cm.is_finite() {
            return Err(bad());
        }
        Ok(Self {
            site: site.to_string(),
            top_cm,
            bottom_cm,
        })
    }
}

/// A soil layer (horizon) of a site's profile, with its texture and physical properties.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Layer {
    /// The site and depth range.
    pub at: LayerRef,
    /// Horizon label (for example `Ap`, `Bt1`).
    pub horizon: Option<String>,
    /// Sand fraction, mass % of the fine earth.
    pub sand_pct: Option<f64>,
    /// Silt fraction, mass %.
    pub silt_pct: Option<f64>,
    /// Clay fraction, mass %.
    pub clay_pct: Option<f64>,
    /// Organic carbon, mass %.
    pub organic_carbon_pct: Option<f64>,
    /// Dry bulk density, g/cm3.
    pub bulk_density_g_cm3: Option<f64>,
    /// Saturated hydraulic conductivity, cm/day.
    pub ks_cm_per_day: Option<f64>,
    /// Stable identifier.
    pub uid: Uid,
}

impl Layer {
    /// A layer known only by its site and depths (as a lab file names it).
    pub fn bare(at: LayerRef) -> Self {
        Self {
            at,
            horizon: None,
            sand_pct: None,
            silt_pct: None,
            clay_pct: None,
            organic_carbon_pct: None,
            bulk_density_g_cm3: None,
            ks_cm_per_day: None,
            uid: Uid::random(),
        }
    }
}

text_enum! {
    /// How a sample was taken.
    SampleKind, "a sample kind" {
        /// An undisturbed core measured in the lab.
        LabCore => "lab_core",
        /// A tensiometer and a water-content sensor logging side by side in the field.
        FieldPairing => "field_pairing",
    }
}

/// A sample taken from a layer: a lab core or a field sensor pairing.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Sample {
    /// The layer it was taken from.
    pub layer: LayerRef,
    /// The code other commands take (unique in a campaign).
    pub code: String,
    /// Lab core or field pairing.
    pub kind: SampleKind,
    /// Day it was taken.
    pub collected_on: Option<NaiveDate>,
    /// Dry bulk density of this sample, g/cm3.
    pub bulk_density_g_cm3: Option<f64>,
    /// Free text.
    pub notes: Option<String>,
    /// Stable identifier.
    pub uid: Uid,
}

/// How a reading was measured (free text, for example `hanging column`, `sandbox`,
/// `pressure plate`, `dewpoint`).
#[derive(Debug, Clone, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(transparent)]
pub struct Method(pub String);

impl Method {
    /// The method as written.
    pub fn as_str(&self) -> &str {
        &self.0
    }
}

impl fmt::Display for Method {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.0)
    }
}

text_enum! {
    /// Which branch of the hysteresis loop a reading lies on.
    Branch, "a branch" {
        /// The sample was drying (suction rising): the usual lab sequence.
        Drying => "drying",
        /// The sample was wetting (suction falling).
        Wetting => "wetting",
        /// Not recorded.
        Unknown => "unknown",
    }
}

text_enum! {
    /// What a field logger sensor measures.
    SensorKind, "a sensor" {
        /// Matric suction: a tensiometer (stored as suction head h, cm).
        Tensiometer => "tensiometer",
        /// Volumetric water content: a dielectric or TDR probe (stored as theta, m3/m3).
        WaterContent => "water_content",
    }
}

/// Where a stored value came from: its import batch and the physical line in that file.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
pub struct Provenance {
    /// The import batch (database id); `None` until stored.
    pub batch: Option<i64>,
    /// Physical line in the source file (the header is line 1).
    pub line: u64,
}

/// One retention measurement: a suction and the water content the sample held at it.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Reading {
    /// Code of the sample.
    pub sample: String,
    /// Matric suction head, cm of water, 0 or more (positive when drier).
    pub h_cm: f64,
    /// Volumetric water content, m3/m3.
    pub theta: f64,
    /// How it was measured.
    pub method: Option<Method>,
    /// Day of the measurement.
    pub measured_on: Option<NaiveDate>,
    /// Drying, wetting or unknown.
    pub branch: Branch,
    /// Relative weight in a weighted fit (positive).
    pub weight: Option<f64>,
    /// Free text from the lab sheet.
    pub notes: Option<String>,
    /// Import batch and source line.
    pub provenance: Provenance,
    /// Stable identifier.
    pub uid: Uid,
}

text_enum! {
    /// Where a flag came from.
    FlagOrigin, "a flag origin" {
        /// Suggested by the outlier checks.
        Auto => "auto",
        /// Set by the user.
        Manual => "manual",
    }
}

text_enum! {
    /// The review state of a flag. Flags are never deleted; their status changes.
    FlagStatus, "a flag status" {
        /// Proposed, not yet reviewed.
        Suggested => "suggested",
        /// Reviewed and confirmed: the value is excluded from fits.
        Accepted => "accepted",
        /// Reviewed and rejected: the value stays in.
        Dismissed => "dismissed",
        /// Withdrawn: an accepted flag the user took back, or a suggestion the checks no
        /// longer make. The value stays in.
        Cleared => "cleared",
    }
}

/// What a flag is attached to (database ids).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum FlagTarget {
    /// A retention reading.
    Reading(i64),
    /// A field logger record.
    LoggerRecord(i64),
    /// A measured conductivity reading (flagged ones are left out of joint fits).
    ConductivityReading(i64),
}

/// A mark on a suspect reading or logger record, with its review trail.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Flag {
    /// The reading or logger record.
    pub target: FlagTarget,
    /// Why it was flagged (for example `studentized residual 4.1`).
    pub reason: String,
    /// How suspicious, on the scale of the check that raised it.
    pub score: Option<f64>,
    /// Automatic suggestion or the user's own flag.
    pub origin: FlagOrigin,
    /// Review state.
    pub status: FlagStatus,
    /// The reviewer's note.
    pub note: Option<String>,
    /// When the flag was raised (UTC).
    pub created_at: DateTime<Utc>,
    /// When its status was last decided (UTC).
    pub decided_at: Option<DateTime<Utc>>,
}

impl Flag {
    /// Whether the flagged value is left out of fits: an accepted flag, or a manual flag not
    /// yet dismissed or cleared. Suggestions alone never exclude anything.
    pub fn excludes(&self) -> bool {
        match self.status {
            FlagStatus::Accepted => true,
            FlagStatus::Suggested => self.origin == FlagOrigin::Manual,
            FlagStatus::Dismissed | FlagStatus::Cleared => false,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn words_round_trip_and_errors_list_choices() {
        for b in Branch::ALL {
            assert_eq!(b.as_str().parse::<Branch>(), Ok(*b));
        }
        assert_eq!(" Drying ".parse::<Branch>(), Ok(Branch::Drying));
        let err = "up".parse::<Branch>().expect_err("not a branch");
        assert_eq!(
            err,
            "found \"up\", expected a branch (drying, wetting, unknown)"
        );
        assert_eq!(
            "field_pairing".parse::<SampleKind>(),
            Ok(SampleKind::FieldPairing)
        );
    }

    #[test]
    fn layer_refs_print_and_parse() {
        let r: LayerRef = "LV:12.5-40".parse().expect("parses");
        assert_eq!(r.to_string(), "LV:12.5-40");
        assert!(r.same_as(&LayerRef {
            site: "LV".into(),
            top_cm: 12.5,
            bottom_cm: 40.0
        }));
        assert!("LV-0-20".parse::<LayerRef>().is_err());
        assert!(":0-20".parse::<LayerRef>().is_err());
    }

    #[test]
    fn only_accepted_or_live_manual_flags_exclude() {
        let mut f = Flag {
            target: FlagTarget::Reading(1),
            reason: "test".into(),
            score: None,
            origin: FlagOrigin::Auto,
            status: FlagStatus::Suggested,
            note: None,
            created_at: Utc::now(),
            decided_at: None,
        };
        assert!(!f.excludes());
        f.status = FlagStatus::Accepted;
        assert!(f.excludes());
        f.origin = FlagOrigin::Manual;
        f.status = FlagStatus::Suggested;
        assert!(f.excludes());
        f.status = FlagStatus::Cleared;
        assert!(!f.excludes());
    }

    #[test]
    fn uids_are_uuids() {
        let a = Uid::random();
        assert_ne!(a, Uid::random());
        assert_eq!(Uid::parse(a.as_str()), Ok(a.clone()));
        assert_eq!(a.as_str().len(), 36);
        assert!(Uid::parse("nope").is_err());
        let parsed = uuid::Uuid::parse_str(a.as_str()).expect("uuid");
        assert_eq!(parsed.get_version_num(), 4);
        assert_eq!(parsed.get_variant(), uuid::Variant::RFC4122);
    }
}
