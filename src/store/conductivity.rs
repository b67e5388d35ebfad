//! Measured hydraulic conductivity: K readings per sample (at a suction or at a water
//! content) and a core's measured Ks, with the file and line each came from.

use chrono::NaiveDate;
use rusqlite::{Connection, OptionalExtension, Row, params};

use super::sql_types::{LenientDate, opt_date};
use super::{Filter, Result};
use crate::model::domain::{LayerRef, Uid};

/// Where a conductivity was measured: at a suction or at a water content.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Where {
    /// K(h): suction head, cm.
    Suction(f64),
    /// K(theta): volumetric water content, m3/m3.
    Water(f64),
}

impl Where {
    /// The suction, cm, for a K(h) reading.
    pub fn h_cm(self) -> Option<f64> {
        match self {
            Where::Suction(h) => Some(h),
            Where::Water(_) => None,
        }
    }

    /// The water content, m3/m3, for a K(theta) reading.
    pub fn theta(self) -> Option<f64> {
        match self {
            Where::Suction(_) => None,
            Where::Water(t) => Some(t),
        }
    }
}

/// One measured conductivity, canonical units.
#[derive(Debug, Clone, PartialEq)]
pub struct ConductivityReading {
    /// Sample code.
    pub sample: String,
    /// Where it was measured.
    pub at: Where,
    /// Hydraulic conductivity, cm/day (positive).
    pub k_cm_per_day: f64,
    /// Measuring method as the lab wrote it (`evaporation`, `outflow`, ...).
    pub method: Option<String>,
    /// Day measured.
    pub measured_on: Option<NaiveDate>,
    /// Free text.
    pub notes: Option<String>,
    /// The import batch (file) it came from.
    pub batch: Option<i64>,
    /// Its physical line in that file.
    pub line: u64,
    /// Stable identifier across campaign files.
    pub uid: Uid,
}

/// A conductivity reading as stored, with ids, its layer and its file's name.
#[derive(Debug, Clone, PartialEq)]
pub struct StoredConductivity {
    /// Database id.
    pub id: i64,
    /// Database id of its sample.
    pub sample_id: i64,
    /// The reading.
    pub reading: ConductivityReading,
    /// Site and depths of its sample's layer.
    pub layer: LayerRef,
    /// Name of the imported file it came from.
    pub source_file: Option<String>,
    /// Left out of joint fits by a flag (an accepted flag, or a manual one not cleared).
    pub excluded: bool,
}

/// SQL condition, on a conductivity reading aliased `c`, that is true when joint fits must
/// leave it out (the rule of [`super::fits::EXCLUDED`]).
pub const K_EXCLUDED: &str = concat!(
    "EXISTS (SELECT 1 FROM flag f WHERE f.conductivity_reading_id = c.id AND ",
    flag_excludes!(),
    ")"
);

const COLUMNS: &str = concat!(
    "c.id, c.sample_id, m.code, c.h_cm, c.theta, c.k_cm_per_day, c.method, c.measured_at, \
     c.notes, c.batch_id, c.source_line, c.uid, b.file_name, s.code, l.top_cm, l.bottom_cm, \
     EXISTS (SELECT 1 FROM flag f WHERE f.conductivity_reading_id = c.id AND ",
    flag_excludes!(),
    ")"
);

const FROM: &str = "conductivity_reading c JOIN sample m ON c.sample_id = m.id \
     JOIN layer l ON m.layer_id = l.id JOIN site s ON l.site_id = s.id \
     LEFT JOIN import_batch b ON c.batch_id = b.id";

fn from_row(r: &Row<'_>) -> rusqlite::Result<StoredConductivity> {
    let h: Option<f64> = r.get(3)?;
    let theta: Option<f64> = r.get(4)?;
    let at = match (h, theta) {
        (Some(h), _) => Where::Suction(h),
        (None, Some(t)) => Where::Water(t),
        (None, None) => {
            return Err(rusqlite::Error::InvalidColumnType(
                3,
                "h_cm".to_string(),
                rusqlite::types::Type::Null,
            ));
        }
    };
    let line: Option<i64> = r.get(10)?;
    Ok(StoredConductivity {
        id: r.get(0)?,
        sample_id: r.get(1)?,
        reading: ConductivityReading {
            sample: r.get(2)?,
            at,
            k_cm_per_day: r.get(5)?,
            method: r.get(6)?,
            measured_on: r.get::<_, LenientDate>(7)?.0,
            notes: r.get(8)?,
            batch: r.get(9)?,
            line: line.map_or(0, |l| l as u64),
            uid: r.get(11)?,
        },
        source_file: r.get(12)?,
        excluded: r.get(16)?,
        layer: LayerRef {
            site: r.get(13)?,
            top_cm: r.get(14)?,
            bottom_cm: r.get(15)?,
        },
    })
}

/// Insert a conductivity reading of sample `sample_id`; returns its id.
///
/// # Errors
/// A value outside the schema's ranges, or another SQLite error.
pub fn insert(conn: &Connection, sample_id: i64, r: &ConductivityReading) -> Result<i64> {
    let mut stmt = conn.prepare_cached(
        "INSERT INTO conductivity_reading (uid, sample_id, h_cm, theta, k_cm_per_day, method,
             measured_at, notes, batch_id, source_line)
         VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9, ?10)",
    )?;
    stmt.execute(params![
        r.uid,
        sample_id,
        r.at.h_cm(),
        r.at.theta(),
        r.k_cm_per_day,
        r.method,
        opt_date(r.measured_on),
        r.notes,
        r.batch,
        (r.line > 0).then_some(r.line as i64),
    ])?;
    Ok(conn.last_insert_rowid())
}

/// Every conductivity reading of sample `sample_id`: K(h) by suction, then K(theta) wettest
/// first.
///
/// # Errors
/// An SQLite error.
pub fn of_sample(conn: &Connection, sample_id: i64) -> Result<Vec<StoredConductivity>> {
    let mut stmt = conn.prepare_cached(&format!(
        "SELECT {COLUMNS} FROM {FROM} WHERE c.sample_id = ?1
         ORDER BY c.h_cm IS NULL, c.h_cm, c.theta DESC, c.id"
    ))?;
    let rows = stmt.query_map([sample_id], from_row)?;
    Ok(rows.collect::<rusqlite::Result<_>>()?)
}

/// The conductivity readings `filter` selects, by site, depth, sample and suction.
///
/// # Errors
/// An SQLite error.
pub fn list(conn: &Connection, filter: Filter<'_>) -> Result<Vec<StoredConductivity>> {
    let mut stmt = conn.prepare(&format!(
        "SELECT {COLUMNS} FROM {FROM}
         WHERE (?1 IS NULL OR s.code = ?1) AND (?2 IS NULL OR m.code = ?2)
         ORDER BY s.code, l.top_cm, l.bottom_cm, m.code, c.h_cm IS NULL, c.h_cm, c.theta DESC,
                  c.id"
    ))?;
    let rows = stmt.query_map(params![filter.site, filter.sample], from_row)?;
    Ok(rows.collect::<rusqlite::Result<_>>()?)
}

/// A sample's measured Ks, cm/day, and its layer's (the sample's own comes first).
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct SampleKs {
    /// The core's own measured Ks.
    pub sample: Option<f64>,
    /// Its layer's Ks.
    pub layer: Option<f64>,
}

impl SampleKs {
    /// The Ks to use: the sample's, else its layer's.
    pub fn value(self) -> Option<f64> {
        self.sample.or(self.layer)
    }
}

/// The measured Ks of sample `sample_id` and of its layer.
///
/// # Errors
/// An SQLite error.
pub fn ks_of_sample(conn: &Connection, sample_id: i64) -> Result<SampleKs> {
    let mut stmt = conn.prepare_cached(
        "SELECT m.ks_cm_per_day, l.ks_cm_per_day FROM sample m JOIN layer l ON m.layer_id = l.id
         WHERE m.id = ?1",
    )?;
    let mut rows = stmt.query([sample_id])?;
    Ok(match rows.next()? {
        Some(r) => SampleKs {
            sample: r.get(0)?,
            layer: r.get(1)?,
        },
        None => SampleKs::default(),
    })
}

/// Record the measured Ks of sample `id`, cm/day, from import batch `batch`.
///
/// # Errors
/// A value the schema refuses, or another SQLite error.
pub fn set_sample_ks(
    conn: &Connection,
    id: i64,
    ks_cm_per_day: f64,
    batch: Option<i64>,
) -> Result<()> {
    conn.prepare_cached("UPDATE sample SET ks_cm_per_day = ?2, ks_batch_id = ?3 WHERE id = ?1")?
        .execute(params![id, ks_cm_per_day, batch])?;
    Ok(())
}

/// What a joint fit row stores besides its retention view: the joint report and the
/// conductivity readings it used.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct JointRecord {
    /// The whole joint fit.
    pub report: crate::fit::joint::JointReport,
    /// Ids of the conductivity readings used, in the report's order.
    pub conductivity_reading_ids: Vec<i64>,
    /// Where a held Ks came from (`sample`, `layer`), when it was the measured one.
    pub ks_source: Option<String>,
    /// SHA-256 of the conductivity readings used ([`fingerprint`]), to tell when they changed.
    #[serde(default)]
    pub conductivity_fingerprint: Option<String>,
}

/// SHA-256 (hex) of conductivity readings: ids, where measured, K and whether a flag leaves
/// the reading out, in id order. Changes when a reading is added or removed, any value of one
/// changes, or it is flagged or unflagged. (The exclusion enters only when set, so files
/// without conductivity flags keep the fingerprints their joint fits recorded.)
pub fn fingerprint(readings: &[StoredConductivity]) -> String {
    fingerprint_of(
        readings
            .iter()
            .map(|r| (r.id, r.reading.at, r.reading.k_cm_per_day, r.excluded)),
    )
}

/// [`fingerprint`] of (id, where measured, K, excluded) tuples, for readers that hold the
/// readings in another form (the campaign exchange).
pub fn fingerprint_of(readings: impl IntoIterator<Item = (i64, Where, f64, bool)>) -> String {
    use sha2::{Digest, Sha256};
    let mut sorted: Vec<(i64, Where, f64, bool)> = readings.into_iter().collect();
    sorted.sort_by_key(|r| r.0);
    let mut hasher = Sha256::new();
    for (id, at, k, excluded) in sorted {
        hasher.update(id.to_le_bytes());
        let (tag, at) = match at {
            Where::Suction(h) => (0u8, h),
            Where::Water(t) => (1u8, t),
        };
        hasher.update([tag]);
        hasher.update(at.to_bits().to_le_bytes());
        hasher.update(k.to_bits().to_le_bytes());
        if excluded {
            hasher.update(b"excluded");
        }
    }
    crate::model::number::hex(&hasher.finalize())
}

/// Whether the conductivity readings of sample `sample_id` changed since its joint fit
/// `fit_id` was made: `None` for a fit that is not joint or recorded no fingerprint.
///
/// # Errors
/// An SQLite error.
pub fn changed_since(conn: &Connection, fit_id: i64, sample_id: i64) -> Result<Option<bool>> {
    let recorded: Option<String> = conn
        .prepare_cached(
            "SELECT json_extract(joint, '$.conductivity_fingerprint') FROM fit WHERE id = ?1",
        )?
        .query_row([fit_id], |r| r.get(0))?;
    match recorded {
        None => Ok(None),
        Some(fp) => Ok(Some(fp != fingerprint(&of_sample(conn, sample_id)?))),
    }
}

/// Attach a joint record to fit `fit_id` (in the transaction that inserted it).
///
/// # Errors
/// A record that does not encode, or an SQLite error.
pub fn set_joint(conn: &Connection, fit_id: i64, record: &JointRecord) -> Result<()> {
    let text = serde_json::to_string(record)
        .map_err(|e| super::StoreError::Corrupt(format!("cannot encode: {e}")))?;
    conn.prepare_cached("UPDATE fit SET joint = ?2 WHERE id = ?1")?
        .execute(params![fit_id, text])?;
    Ok(())
}

/// The joint record of fit `fit_id`, if it is a joint fit.
///
/// # Errors
/// A stored record that does not decode, or an SQLite error.
pub fn joint_of(conn: &Connection, fit_id: i64) -> Result<Option<JointRecord>> {
    let text: Option<String> = conn
        .prepare_cached("SELECT joint FROM fit WHERE id = ?1")?
        .query_row([fit_id], |r| r.get(0))
        .optional()?
        .flatten();
    text.map(|t| {
        serde_json::from_str(&t).map_err(|e| {
            super::StoreError::Corrupt(format!("fit {fit_id}: joint report does not decode: {e}"))
        })
    })
    .transpose()
}

/// The fit to make current next when the user steps through a sample's kinds of fit: the
/// newest successful fit of each request (`van-genuchten`, `auto`, a fit with conductivity,
/// one with the texture prior), newest first; the one after the current fit's kind, wrapping
/// round, with its kind. `None` when the sample has fewer than two kinds.
///
/// # Errors
/// An SQLite error.
pub fn next_current(conn: &Connection, sample_id: i64) -> Result<Option<(i64, String)>> {
    let mut stmt = conn.prepare_cached(
        "SELECT id, coalesce(requested, model), is_current FROM fit
         WHERE sample_id = ?1 AND status = 'ok' ORDER BY id DESC",
    )?;
    let rows = stmt.query_map([sample_id], |r| {
        Ok((
            r.get::<_, i64>(0)?,
            r.get::<_, String>(1)?,
            r.get::<_, bool>(2)?,
        ))
    })?;
    // (newest fit of the kind, whether the current fit is of this kind)
    let mut kinds: Vec<(String, i64, bool)> = Vec::new();
    for row in rows {
        let (id, kind, current) = row?;
        match kinds.iter_mut().find(|(k, _, _)| *k == kind) {
            Some(entry) => entry.2 |= current,
            None => kinds.push((kind, id, current)),
        }
    }
    if kinds.len() < 2 {
        return Ok(None);
    }
    let next = match kinds.iter().position(|(_, _, current)| *current) {
        Some(i) => (i + 1) % kinds.len(),
        None => 0,
    };
    let (kind, id, _) = kinds.swap_remove(next);
    Ok(Some((id, kind)))
}

/// Make fit `fit_id` its sample's current fit (a retention-only or a joint fit of its
/// history); returns the sample's code and the fit that was current before.
///
/// # Errors
/// [`super::StoreError::Refused`] for a fit that does not exist or failed; an SQLite error.
pub fn make_current(conn: &Connection, fit_id: i64) -> Result<(String, Option<i64>)> {
    let row: Option<(i64, String, String)> = conn
        .prepare_cached(
            "SELECT f.sample_id, f.status, m.code FROM fit f JOIN sample m ON f.sample_id = m.id
             WHERE f.id = ?1",
        )?
        .query_row([fit_id], |r| Ok((r.get(0)?, r.get(1)?, r.get(2)?)))
        .optional()?;
    let Some((sample_id, status, code)) = row else {
        return Err(super::StoreError::Refused(format!(
            "no fit {fit_id}; `porewise list DB fits --sample CODE --all` lists a sample's fits"
        )));
    };
    if status != "ok" {
        return Err(super::StoreError::Refused(format!(
            "fit {fit_id} failed and cannot be current; choose a fit with status ok"
        )));
    }
    let before: Option<i64> = conn
        .prepare_cached("SELECT id FROM fit WHERE sample_id = ?1 AND is_current = 1")?
        .query_row([sample_id], |r| r.get(0))
        .optional()?;
    conn.prepare_cached("UPDATE fit SET is_current = 0 WHERE sample_id = ?1 AND is_current = 1")?
        .execute([sample_id])?;
    conn.prepare_cached("UPDATE fit SET is_current = 1 WHERE id = ?1")?
        .execute([fit_id])?;
    Ok((code, before))
}

/// A stored joint fit, for listings.
#[derive(Debug, Clone, PartialEq)]
pub struct JointRow {
    /// Whether the sample's conductivity readings are still those the fit used (`None` for a
    /// fit recorded without their fingerprint).
    pub conductivity_unchanged: Option<bool>,
    /// Fit id.
    pub fit_id: i64,
    /// Sample code.
    pub sample: String,
    /// Site code.
    pub site: String,
    /// Whether it is the sample's current fit.
    pub current: bool,
    /// The joint record.
    pub record: JointRecord,
}

/// Every joint fit of the samples `filter` selects (the history included), by site, sample
/// and fit id.
///
/// # Errors
/// A stored record that does not decode, or an SQLite error.
pub fn joint_fits(conn: &Connection, filter: Filter<'_>) -> Result<Vec<JointRow>> {
    let mut stmt = conn.prepare(
        "SELECT f.id, m.code, s.code, f.is_current, f.joint, f.sample_id FROM fit f
         JOIN sample m ON f.sample_id = m.id JOIN layer l ON m.layer_id = l.id
         JOIN site s ON l.site_id = s.id
         WHERE f.joint IS NOT NULL AND (?1 IS NULL OR s.code = ?1) AND (?2 IS NULL OR m.code = ?2)
         ORDER BY s.code, l.top_cm, l.bottom_cm, m.code, f.id",
    )?;
    let rows = stmt.query_map(params![filter.site, filter.sample], |r| {
        Ok((
            r.get::<_, i64>(0)?,
            r.get::<_, String>(1)?,
            r.get::<_, String>(2)?,
            r.get::<_, bool>(3)?,
            r.get::<_, String>(4)?,
            r.get::<_, i64>(5)?,
        ))
    })?;
    let mut out = Vec::new();
    for row in rows {
        let (fit_id, sample, site, current, text, sample_id) = row?;
        let record: JointRecord = serde_json::from_str(&text).map_err(|e| {
            super::StoreError::Corrupt(format!("fit {fit_id}: joint report does not decode: {e}"))
        })?;
        let conductivity_unchanged = match &record.conductivity_fingerprint {
            Some(f) => Some(*f == fingerprint(&of_sample(conn, sample_id)?)),
            None => None,
        };
        out.push(JointRow {
            conductivity_unchanged,
            fit_id,
            sample,
            site,
            current,
            record,
        });
    }
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::store::Campaign;

    fn campaign_with_fits(fits: &[(i64, &str, &str, bool)]) -> Campaign {
        let c = Campaign::in_memory("t", 33.0, 1500.0).expect("campaign");
        let conn = c.connection();
        conn.execute_batch(
            "INSERT INTO site (id, uid, code) VALUES (1, '00000000-0000-4000-8000-000000000001', 'S');
             INSERT INTO layer (id, uid, site_id, top_cm, bottom_cm)
                 VALUES (1, '00000000-0000-4000-8000-000000000002', 1, 0, 10);
             INSERT INTO sample (id, uid, layer_id, code, kind)
                 VALUES (1, '00000000-0000-4000-8000-000000000003', 1, 'S-a', 'lab_core');",
        )
        .expect("fixture");
        for (id, requested, status, current) in fits {
            conn.execute(
                "INSERT INTO fit (id, sample_id, model, parameters, statistics, n_points,
                     readings_fingerprint, created_at, is_current, status, requested)
                 VALUES (?1, 1, 'van-genuchten', '{}', '{}', 6, 'x', '2026-06-01T00:00:00Z',
                         ?2, ?3, ?4)",
                params![id, current, status, requested],
            )
            .expect("fit");
        }
        c
    }

    #[test]
    fn the_next_current_fit_steps_through_the_newest_fit_of_each_kind() {
        let joint = "van-genuchten+conductivity";
        let c = campaign_with_fits(&[
            (1, "van-genuchten", "ok", false),
            (2, joint, "ok", false),
            (3, "van-genuchten", "ok", true),
            (4, joint, "failed", false),
            (5, "auto", "ok", false),
        ]);
        let conn = c.connection();
        // Kinds newest first: auto (5), van-genuchten (3, current), joint (2; 4 failed).
        assert_eq!(
            next_current(conn, 1).expect("next"),
            Some((2, joint.into()))
        );
        make_current(conn, 2).expect("current");
        assert_eq!(
            next_current(conn, 1).expect("next"),
            Some((5, "auto".into()))
        );
        make_current(conn, 5).expect("current");
        assert_eq!(
            next_current(conn, 1).expect("next"),
            Some((3, "van-genuchten".into()))
        );
        // An older fit of a kind that is current counts for its kind.
        make_current(conn, 1).expect("current");
        assert_eq!(
            next_current(conn, 1).expect("next"),
            Some((2, joint.into()))
        );
    }

    #[test]
    fn one_kind_of_fit_has_no_other_to_step_to() {
        let c = campaign_with_fits(&[(1, "auto", "ok", false), (2, "auto", "ok", true)]);
        assert_eq!(next_current(c.connection(), 1).expect("next"), None);
        let none = campaign_with_fits(&[]);
        assert_eq!(next_current(none.connection(), 1).expect("next"), None);
    }
}
