//! A campaign's rows on the server, in the exchange form of the campaign files
//! ([`crate::store::exchange::CampaignRows`]): read one campaign back, and write rows with
//! binary COPY (logger records streamed, no statement per row).
//!
//! Two columns exist only on the server: each layer's USDA texture class and each current
//! fit's derived values, both computed here when a row is written, so the server can filter
//! and summarise them in SQL ([`super::stats`]).

use std::collections::HashMap;

use postgres::GenericClient;
use postgres::binary_copy::BinaryCopyInWriter;
use postgres::fallible_iterator::FallibleIterator;
use postgres::types::{ToSql, Type};

use super::{ArchiveError, Result, server};
use crate::analysis::water::{available_water_between, curve_of};
use crate::fit::FitReport;
use crate::model::derived::derive;
use crate::model::texture::TextureClass;
use crate::store::exchange::{
    BatchRow, CampaignRow, CampaignRows, ConductivityRow, FitRow, FlagEventRow, FlagRow,
    FlagTarget, LayerRow, LoggerKey, LoggerPoint, LoggerSeries, ReadingRow, SampleRow, SiteRow,
};

/// The campaign's uid for a name or uid as the user gave it.
///
/// # Errors
/// No campaign, or a name that several campaigns share (their uids are listed).
pub fn find_campaign(client: &mut impl GenericClient, name_or_uid: &str) -> Result<CampaignRow> {
    let rows = client
        .query(
            "SELECT uid, name, description, fc_kpa, pwp_kpa, created_at, texture_prior_max_readings
             FROM campaign WHERE uid = $1 OR name = $1 ORDER BY uid = $1 DESC, uid",
            &[&name_or_uid],
        )
        .map_err(server("cannot look up the campaign"))?;
    let found: Vec<CampaignRow> = rows.iter().map(campaign_row).collect();
    match found.as_slice() {
        [] => Err(ArchiveError::Invalid(format!(
            "the archive holds no campaign named or with uid {name_or_uid:?} (see `porewise archive list`)"
        ))),
        [one, ..] if one.uid == name_or_uid => Ok(one.clone()),
        [one] => Ok(one.clone()),
        many => Err(ArchiveError::Invalid(format!(
            "{} campaigns are named {name_or_uid:?}; give one of their uids: {}",
            many.len(),
            many.iter()
                .map(|c| c.uid.as_str())
                .collect::<Vec<_>>()
                .join(", ")
        ))),
    }
}

fn campaign_row(r: &postgres::Row) -> CampaignRow {
    CampaignRow {
        uid: r.get(0),
        name: r.get(1),
        description: r.get(2),
        fc_kpa: r.get(3),
        pwp_kpa: r.get(4),
        created_at: r.get(5),
        texture_prior_max_readings: r.get(6),
    }
}

/// Every row of one campaign on the server, or `None` when the archive does not hold it.
/// Rows come in uid order, logger series in (site uid, sensor id) order and their points in
/// time order (byte order, as the campaign files sort them).
///
/// # Errors
/// A server error.
pub fn read_campaign(client: &mut impl GenericClient, uid: &str) -> Result<Option<CampaignRows>> {
    let Some(campaign) = client
        .query_opt(
            "SELECT uid, name, description, fc_kpa, pwp_kpa, created_at, texture_prior_max_readings
             FROM campaign WHERE uid = $1",
            &[&uid],
        )
        .map_err(server("cannot read the campaign"))?
        .as_ref()
        .map(campaign_row)
    else {
        return Ok(None);
    };
    let mut run = |sql: &str| -> Result<Vec<postgres::Row>> {
        client
            .query(sql, &[&uid])
            .map_err(server("cannot read the campaign's rows"))
    };
    let batches = run(
        "SELECT uid, file_name, sha256, kind, rows, forced, imported_at
         FROM import_batch WHERE campaign_uid = $1 ORDER BY uid COLLATE \"C\"",
    )?
    .iter()
    .map(|r| BatchRow {
        uid: r.get(0),
        file_name: r.get(1),
        sha256: r.get(2),
        kind: r.get(3),
        rows: r.get(4),
        forced: r.get(5),
        imported_at: r.get(6),
    })
    .collect();
    let sites = run(
        "SELECT uid, code, name, latitude, longitude, elevation_m, notes, batch_uid
         FROM site WHERE campaign_uid = $1 ORDER BY uid COLLATE \"C\"",
    )?
    .iter()
    .map(|r| SiteRow {
        uid: r.get(0),
        code: r.get(1),
        name: r.get(2),
        latitude: r.get(3),
        longitude: r.get(4),
        elevation_m: r.get(5),
        notes: r.get(6),
        batch_uid: r.get(7),
    })
    .collect();
    let layers = run(
        "SELECT uid, site_uid, top_cm, bottom_cm, horizon, sand_pct, silt_pct, clay_pct,
                organic_carbon_pct, bulk_density_g_cm3, ks_cm_per_day, batch_uid
         FROM layer WHERE campaign_uid = $1 ORDER BY uid COLLATE \"C\"",
    )?
    .iter()
    .map(|r| LayerRow {
        uid: r.get(0),
        site_uid: r.get(1),
        top_cm: r.get(2),
        bottom_cm: r.get(3),
        horizon: r.get(4),
        sand_pct: r.get(5),
        silt_pct: r.get(6),
        clay_pct: r.get(7),
        organic_carbon_pct: r.get(8),
        bulk_density_g_cm3: r.get(9),
        ks_cm_per_day: r.get(10),
        batch_uid: r.get(11),
    })
    .collect();
    let samples = run(
        "SELECT uid, layer_uid, code, kind, collected_on, bulk_density_g_cm3, notes, batch_uid,
                ks_cm_per_day, ks_batch_uid
         FROM sample WHERE campaign_uid = $1 ORDER BY uid COLLATE \"C\"",
    )?
    .iter()
    .map(|r| SampleRow {
        uid: r.get(0),
        layer_uid: r.get(1),
        code: r.get(2),
        kind: r.get(3),
        collected_on: r.get(4),
        bulk_density_g_cm3: r.get(5),
        notes: r.get(6),
        batch_uid: r.get(7),
        ks_cm_per_day: r.get(8),
        ks_batch_uid: r.get(9),
    })
    .collect();
    let readings = run(
        "SELECT uid, sample_uid, h_cm, theta, method, measured_at, branch, weight, notes,
                batch_uid, source_line
         FROM reading WHERE campaign_uid = $1 ORDER BY uid COLLATE \"C\"",
    )?
    .iter()
    .map(|r| ReadingRow {
        uid: r.get(0),
        sample_uid: r.get(1),
        h_cm: r.get(2),
        theta: r.get(3),
        method: r.get(4),
        measured_at: r.get(5),
        branch: r.get(6),
        weight: r.get(7),
        notes: r.get(8),
        batch_uid: r.get(9),
        source_line: r.get(10),
    })
    .collect();
    let conductivity = run(
        "SELECT uid, sample_uid, h_cm, theta, k_cm_per_day, method, measured_at, notes,
                batch_uid, source_line
         FROM conductivity_reading WHERE campaign_uid = $1 ORDER BY uid COLLATE \"C\"",
    )?
    .iter()
    .map(|r| ConductivityRow {
        uid: r.get(0),
        sample_uid: r.get(1),
        h_cm: r.get(2),
        theta: r.get(3),
        k_cm_per_day: r.get(4),
        method: r.get(5),
        measured_at: r.get(6),
        notes: r.get(7),
        batch_uid: r.get(8),
        source_line: r.get(9),
    })
    .collect();
    let flags = run(
        "SELECT uid, reading_uid, logger_site_uid, logger_sensor_id, logger_time,
                conductivity_reading_uid, reason, score, origin, status, note, created_at,
                decided_at, rule, decided_by
         FROM flag WHERE campaign_uid = $1 ORDER BY uid COLLATE \"C\"",
    )?
    .iter()
    .map(flag_row)
    .collect::<Result<Vec<_>>>()?;
    let flag_events = run(
        "SELECT uid, flag_uid, from_status, to_status, actor, note, at
         FROM flag_event WHERE campaign_uid = $1 ORDER BY uid COLLATE \"C\"",
    )?
    .iter()
    .map(|r| FlagEventRow {
        uid: r.get(0),
        flag_uid: r.get(1),
        from_status: r.get(2),
        to_status: r.get(3),
        actor: r.get(4),
        note: r.get(5),
        at: r.get(6),
    })
    .collect();
    let fits = run(
        "SELECT uid, sample_uid, model, parameters, standard_errors, covariance, statistics,
                n_points, readings_key, created_at, is_current, status, message, requested,
                fixed, report, ranking, reading_uids, conductivity, joint
         FROM fit WHERE campaign_uid = $1 ORDER BY uid COLLATE \"C\"",
    )?
    .iter()
    .map(|r| FitRow {
        uid: r.get(0),
        sample_uid: r.get(1),
        model: r.get(2),
        parameters: r.get(3),
        standard_errors: r.get(4),
        covariance: r.get(5),
        statistics: r.get(6),
        n_points: r.get(7),
        readings_key: r.get(8),
        created_at: r.get(9),
        is_current: r.get(10),
        status: r.get(11),
        message: r.get(12),
        requested: r.get(13),
        fixed: r.get(14),
        report: r.get(15),
        ranking: r.get(16),
        reading_uids: r.get(17),
        conductivity: r.get(18),
        joint: r.get(19),
    })
    .collect();
    let logger = read_logger(client, uid)?;
    Ok(Some(CampaignRows {
        campaign,
        batches,
        sites,
        layers,
        samples,
        readings,
        conductivity,
        logger,
        flags,
        flag_events,
        fits,
    }))
}

fn flag_row(r: &postgres::Row) -> Result<FlagRow> {
    let reading: Option<String> = r.get(1);
    let site: Option<String> = r.get(2);
    let sensor: Option<String> = r.get(3);
    let time: Option<String> = r.get(4);
    let conductivity: Option<String> = r.get(5);
    let uid: String = r.get(0);
    let target = match (reading, site, sensor, time, conductivity) {
        (Some(u), None, None, None, None) => FlagTarget::Reading(u),
        (None, Some(site_uid), Some(sensor_id), Some(time), None) => {
            FlagTarget::Logger(LoggerKey {
                site_uid,
                sensor_id,
                time,
            })
        }
        (None, None, None, None, Some(u)) => FlagTarget::Conductivity(u),
        _ => {
            return Err(ArchiveError::Invalid(format!(
                "flag {uid} on the server names no single reading, logger record or conductivity reading"
            )));
        }
    };
    Ok(FlagRow {
        uid,
        target,
        reason: r.get(6),
        score: r.get(7),
        origin: r.get(8),
        status: r.get(9),
        note: r.get(10),
        created_at: r.get(11),
        decided_at: r.get(12),
        rule: r.get(13),
        decided_by: r.get(14),
    })
}

/// The campaign's logger records as series, read with a portal-less streaming query.
fn read_logger(client: &mut impl GenericClient, uid: &str) -> Result<Vec<LoggerSeries>> {
    let mut series: Vec<LoggerSeries> = Vec::new();
    let mut batch_index: HashMap<Option<String>, u32> = HashMap::new();
    let params: [&(dyn ToSql + Sync); 1] = [&uid];
    let mut rows = client
        .query_raw(
            "SELECT site_uid, sensor_id, time, depth_cm, sensor, value, batch_uid, source_line
             FROM logger_record WHERE campaign_uid = $1
             ORDER BY site_uid, sensor_id, time",
            params,
        )
        .map_err(server("cannot read the campaign's logger records"))?;
    while let Some(r) = rows
        .next()
        .map_err(server("cannot read the campaign's logger records"))?
    {
        let site_uid: &str = r.get(0);
        let sensor_id: &str = r.get(1);
        let same = series
            .last()
            .is_some_and(|s| s.site_uid == site_uid && s.sensor_id == sensor_id);
        if !same {
            series.push(LoggerSeries {
                site_uid: site_uid.to_string(),
                sensor_id: sensor_id.to_string(),
                batch_uids: Vec::new(),
                points: Vec::new(),
            });
            batch_index.clear();
        }
        let Some(s) = series.last_mut() else { break };
        let batch_uid: Option<String> = r.get(6);
        let batch = *batch_index.entry(batch_uid.clone()).or_insert_with(|| {
            s.batch_uids.push(batch_uid);
            (s.batch_uids.len() - 1) as u32
        });
        s.points.push(LoggerPoint {
            time: r.get(2),
            depth_cm: r.get(3),
            sensor: r.get(4),
            value: r.get(5),
            batch,
            source_line: r.get(7),
        });
    }
    Ok(series)
}

/// Insert or replace the campaign row (the archive's bookkeeping columns are left alone on
/// replace).
///
/// # Errors
/// A server error.
pub fn upsert_campaign(client: &mut impl GenericClient, c: &CampaignRow) -> Result<()> {
    client
        .execute(
            "INSERT INTO campaign (uid, name, description, fc_kpa, pwp_kpa, created_at,
                                   texture_prior_max_readings)
             VALUES ($1, $2, $3, $4, $5, $6, $7)
             ON CONFLICT (uid) DO UPDATE SET name = EXCLUDED.name,
                 description = EXCLUDED.description, fc_kpa = EXCLUDED.fc_kpa,
                 pwp_kpa = EXCLUDED.pwp_kpa, created_at = EXCLUDED.created_at,
                 texture_prior_max_readings = EXCLUDED.texture_prior_max_readings",
            &[
                &c.uid,
                &c.name,
                &c.description,
                &c.fc_kpa,
                &c.pwp_kpa,
                &c.created_at,
                &c.texture_prior_max_readings,
            ],
        )
        .map_err(server("cannot write the campaign row"))?;
    Ok(())
}

/// New rows of a campaign to write (references to rows already on the server are fine).
#[derive(Debug, Default)]
pub struct NewRows<'a> {
    /// Import batches.
    pub batches: Vec<&'a BatchRow>,
    /// Sites.
    pub sites: Vec<&'a SiteRow>,
    /// Layers.
    pub layers: Vec<&'a LayerRow>,
    /// Samples.
    pub samples: Vec<&'a SampleRow>,
    /// Readings.
    pub readings: Vec<&'a ReadingRow>,
    /// Conductivity readings.
    pub conductivity: Vec<&'a ConductivityRow>,
    /// Logger records: (series, point).
    pub logger: Vec<(&'a LoggerSeries, &'a LoggerPoint)>,
    /// Flags.
    pub flags: Vec<&'a FlagRow>,
    /// Flag events.
    pub flag_events: Vec<&'a FlagEventRow>,
    /// Fits.
    pub fits: Vec<&'a FitRow>,
}

impl<'a> NewRows<'a> {
    /// Every row of a campaign (its first push).
    pub fn all(rows: &'a CampaignRows) -> Self {
        Self {
            batches: rows.batches.iter().collect(),
            sites: rows.sites.iter().collect(),
            layers: rows.layers.iter().collect(),
            samples: rows.samples.iter().collect(),
            readings: rows.readings.iter().collect(),
            conductivity: rows.conductivity.iter().collect(),
            logger: rows
                .logger
                .iter()
                .flat_map(|s| s.points.iter().map(move |p| (s, p)))
                .collect(),
            flags: rows.flags.iter().collect(),
            flag_events: rows.flag_events.iter().collect(),
            fits: rows.fits.iter().collect(),
        }
    }

    /// Rows in all.
    pub fn len(&self) -> usize {
        self.batches.len()
            + self.sites.len()
            + self.layers.len()
            + self.samples.len()
            + self.readings.len()
            + self.conductivity.len()
            + self.logger.len()
            + self.flags.len()
            + self.flag_events.len()
            + self.fits.len()
    }

    /// Whether there is nothing to write.
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }
}

/// One binary COPY into `table`: `columns` with their types, one row per item.
fn copy<T>(
    client: &mut impl GenericClient,
    table: &str,
    columns: &[(&str, Type)],
    items: &[T],
    mut values: impl FnMut(&T, &mut dyn FnMut(&[&(dyn ToSql + Sync)]) -> Result<()>) -> Result<()>,
) -> Result<()> {
    if items.is_empty() {
        return Ok(());
    }
    let names: Vec<&str> = columns.iter().map(|c| c.0).collect();
    let types: Vec<Type> = columns.iter().map(|c| c.1.clone()).collect();
    let context = format!("cannot write {table} rows");
    let sink = client
        .copy_in(&format!(
            "COPY {table} ({}) FROM STDIN (FORMAT binary)",
            names.join(", ")
        ))
        .map_err(server(context.clone()))?;
    let mut writer = BinaryCopyInWriter::new(sink, &types);
    for item in items {
        values(item, &mut |row| {
            writer.write(row).map_err(server(context.clone()))
        })?;
    }
    writer.finish().map_err(server(context))?;
    Ok(())
}

/// Derived values of a fit (every successful one, since which is current may change later)
/// under the campaign's suctions: theta at field capacity and
/// at the wilting point, available water and its 95 % interval (m3/m3).
type Derived = [Option<f64>; 5];

fn derived(fit: &FitRow, campaign: &CampaignRow) -> Derived {
    if fit.status != "ok" {
        return [None; 5];
    }
    let Some(mut report) = fit
        .report
        .as_deref()
        .and_then(|r| serde_json::from_str::<FitReport>(r).ok())
    else {
        return [None; 5];
    };
    report.upgrade_stored();
    let Some(curve) = curve_of(&report) else {
        return [None; 5];
    };
    let values = derive(&curve, campaign.fc_kpa, campaign.pwp_kpa);
    let interval =
        available_water_between(&report, campaign.fc_kpa, campaign.pwp_kpa).and_then(|(_, i)| i);
    [
        values.theta_field_capacity,
        values.theta_wilting_point,
        values.plant_available_water,
        interval.as_ref().map(|i| i.lo95),
        interval.map(|i| i.hi95),
    ]
}

/// Write new rows of a campaign (whose row is already on the server), parents first, each
/// kind with one binary COPY; layers get their texture class, successful fits their derived
/// values.
///
/// # Errors
/// A server error (a key that is already there, a reference to a missing row).
#[allow(clippy::too_many_lines)]
pub fn insert(
    client: &mut impl GenericClient,
    campaign: &CampaignRow,
    new: &NewRows<'_>,
) -> Result<()> {
    let c = campaign.uid.as_str();
    let t = |name| (name, Type::TEXT);
    let f = |name| (name, Type::FLOAT8);
    let i = |name| (name, Type::INT8);
    copy(
        client,
        "import_batch",
        &[
            t("campaign_uid"),
            t("uid"),
            t("file_name"),
            t("sha256"),
            t("kind"),
            i("rows"),
            ("forced", Type::BOOL),
            t("imported_at"),
        ],
        &new.batches,
        |r, w| {
            w(&[
                &c,
                &r.uid,
                &r.file_name,
                &r.sha256,
                &r.kind,
                &r.rows,
                &r.forced,
                &r.imported_at,
            ])
        },
    )?;
    copy(
        client,
        "site",
        &[
            t("campaign_uid"),
            t("uid"),
            t("code"),
            t("name"),
            f("latitude"),
            f("longitude"),
            f("elevation_m"),
            t("notes"),
            t("batch_uid"),
        ],
        &new.sites,
        |r, w| {
            w(&[
                &c,
                &r.uid,
                &r.code,
                &r.name,
                &r.latitude,
                &r.longitude,
                &r.elevation_m,
                &r.notes,
                &r.batch_uid,
            ])
        },
    )?;
    copy(
        client,
        "layer",
        &[
            t("campaign_uid"),
            t("uid"),
            t("site_uid"),
            f("top_cm"),
            f("bottom_cm"),
            t("horizon"),
            f("sand_pct"),
            f("silt_pct"),
            f("clay_pct"),
            f("organic_carbon_pct"),
            f("bulk_density_g_cm3"),
            f("ks_cm_per_day"),
            t("batch_uid"),
            t("texture_class"),
        ],
        &new.layers,
        |r, w| {
            let class =
                TextureClass::of_layer(r.sand_pct, r.silt_pct, r.clay_pct).map(TextureClass::name);
            w(&[
                &c,
                &r.uid,
                &r.site_uid,
                &r.top_cm,
                &r.bottom_cm,
                &r.horizon,
                &r.sand_pct,
                &r.silt_pct,
                &r.clay_pct,
                &r.organic_carbon_pct,
                &r.bulk_density_g_cm3,
                &r.ks_cm_per_day,
                &r.batch_uid,
                &class,
            ])
        },
    )?;
    copy(
        client,
        "sample",
        &[
            t("campaign_uid"),
            t("uid"),
            t("layer_uid"),
            t("code"),
            t("kind"),
            t("collected_on"),
            f("bulk_density_g_cm3"),
            t("notes"),
            t("batch_uid"),
            f("ks_cm_per_day"),
            t("ks_batch_uid"),
        ],
        &new.samples,
        |r, w| {
            w(&[
                &c,
                &r.uid,
                &r.layer_uid,
                &r.code,
                &r.kind,
                &r.collected_on,
                &r.bulk_density_g_cm3,
                &r.notes,
                &r.batch_uid,
                &r.ks_cm_per_day,
                &r.ks_batch_uid,
            ])
        },
    )?;
    copy(
        client,
        "reading",
        &[
            t("campaign_uid"),
            t("uid"),
            t("sample_uid"),
            f("h_cm"),
            f("theta"),
            t("method"),
            t("measured_at"),
            t("branch"),
            f("weight"),
            t("notes"),
            t("batch_uid"),
            i("source_line"),
        ],
        &new.readings,
        |r, w| {
            w(&[
                &c,
                &r.uid,
                &r.sample_uid,
                &r.h_cm,
                &r.theta,
                &r.method,
                &r.measured_at,
                &r.branch,
                &r.weight,
                &r.notes,
                &r.batch_uid,
                &r.source_line,
            ])
        },
    )?;
    copy(
        client,
        "conductivity_reading",
        &[
            t("campaign_uid"),
            t("uid"),
            t("sample_uid"),
            f("h_cm"),
            f("theta"),
            f("k_cm_per_day"),
            t("method"),
            t("measured_at"),
            t("notes"),
            t("batch_uid"),
            i("source_line"),
        ],
        &new.conductivity,
        |r, w| {
            w(&[
                &c,
                &r.uid,
                &r.sample_uid,
                &r.h_cm,
                &r.theta,
                &r.k_cm_per_day,
                &r.method,
                &r.measured_at,
                &r.notes,
                &r.batch_uid,
                &r.source_line,
            ])
        },
    )?;
    copy(
        client,
        "logger_record",
        &[
            t("campaign_uid"),
            t("site_uid"),
            t("sensor_id"),
            t("time"),
            f("depth_cm"),
            t("sensor"),
            f("value"),
            t("batch_uid"),
            i("source_line"),
        ],
        &new.logger,
        |(s, p), w| {
            let batch = s.batch_uids.get(p.batch as usize).cloned().flatten();
            w(&[
                &c,
                &s.site_uid,
                &s.sensor_id,
                &p.time,
                &p.depth_cm,
                &p.sensor,
                &p.value,
                &batch,
                &p.source_line,
            ])
        },
    )?;
    copy(
        client,
        "flag",
        &[
            t("campaign_uid"),
            t("uid"),
            t("reading_uid"),
            t("logger_site_uid"),
            t("logger_sensor_id"),
            t("logger_time"),
            t("conductivity_reading_uid"),
            t("reason"),
            f("score"),
            t("origin"),
            t("status"),
            t("note"),
            t("created_at"),
            t("decided_at"),
            t("rule"),
            t("decided_by"),
        ],
        &new.flags,
        |r, w| {
            let (reading, key, conductivity) = match &r.target {
                FlagTarget::Reading(u) => (Some(u), None, None),
                FlagTarget::Logger(k) => (None, Some(k), None),
                FlagTarget::Conductivity(u) => (None, None, Some(u)),
            };
            w(&[
                &c,
                &r.uid,
                &reading,
                &key.map(|k| &k.site_uid),
                &key.map(|k| &k.sensor_id),
                &key.map(|k| &k.time),
                &conductivity,
                &r.reason,
                &r.score,
                &r.origin,
                &r.status,
                &r.note,
                &r.created_at,
                &r.decided_at,
                &r.rule,
                &r.decided_by,
            ])
        },
    )?;
    copy(
        client,
        "flag_event",
        &[
            t("campaign_uid"),
            t("uid"),
            t("flag_uid"),
            t("from_status"),
            t("to_status"),
            t("actor"),
            t("note"),
            t("at"),
        ],
        &new.flag_events,
        |r, w| {
            w(&[
                &c,
                &r.uid,
                &r.flag_uid,
                &r.from_status,
                &r.to_status,
                &r.actor,
                &r.note,
                &r.at,
            ])
        },
    )?;
    copy(
        client,
        "fit",
        &[
            t("campaign_uid"),
            t("uid"),
            t("sample_uid"),
            t("model"),
            t("parameters"),
            t("standard_errors"),
            t("covariance"),
            t("statistics"),
            i("n_points"),
            t("readings_key"),
            t("created_at"),
            ("is_current", Type::BOOL),
            t("status"),
            t("message"),
            t("requested"),
            t("fixed"),
            t("report"),
            t("ranking"),
            ("reading_uids", Type::TEXT_ARRAY),
            t("conductivity"),
            t("joint"),
            f("theta_fc"),
            f("theta_pwp"),
            f("available_water"),
            f("available_water_lo95"),
            f("available_water_hi95"),
        ],
        &new.fits,
        |r, w| {
            let d = derived(r, campaign);
            w(&[
                &c,
                &r.uid,
                &r.sample_uid,
                &r.model,
                &r.parameters,
                &r.standard_errors,
                &r.covariance,
                &r.statistics,
                &r.n_points,
                &r.readings_key,
                &r.created_at,
                &r.is_current,
                &r.status,
                &r.message,
                &r.requested,
                &r.fixed,
                &r.report,
                &r.ranking,
                &r.reading_uids,
                &r.conductivity,
                &r.joint,
                &d[0],
                &d[1],
                &d[2],
                &d[3],
                &d[4],
            ])
        },
    )?;
    Ok(())
}
