//! Push: a campaign file's rows into the archive, by the merge engine's rules
//! ([`crate::store::exchange::plan`] with the archive as INTO and the file as FROM): rows the
//! archive lacks are added, identical ones left alone, conflicts listed and refused unless a
//! preference resolves them. One server transaction per push; pushes of one campaign wait
//! for each other on its row (`SELECT ... FOR UPDATE`), and a serialisation failure or
//! deadlock is retried.

use std::collections::HashMap;
use std::time::Duration;

use postgres::error::SqlState;
use postgres::{Client, Transaction};

use super::rows::{NewRows, insert, read_campaign, upsert_campaign};
use super::{ArchiveError, Result, server};
use crate::store::exchange::{
    CampaignRows, FitRow, MergePlan, Preferences, RowSet, fingerprint, plan, settle_freshness,
};

/// How many times a push is tried when the server reports a serialisation failure or a
/// deadlock.
pub const ATTEMPTS: u32 = 5;

/// What a push did.
#[derive(Debug, Clone)]
pub struct Pushed {
    /// What was done: the merge engine's table of counts and resolved conflicts, or a line
    /// for a new or unchanged campaign.
    pub report: String,
    /// Rows written (inserted or replaced).
    pub written: usize,
    /// Whether the archive already held exactly this content (nothing was compared or written).
    pub unchanged: bool,
    /// Whether the campaign was new to the archive.
    pub created: bool,
    /// The archive's content fingerprint of the campaign after the push.
    pub fingerprint: String,
    /// Tries it took (1 unless the server asked for a retry).
    pub attempts: u32,
    /// A dry run: everything was planned (and, for a campaign the archive has, written inside
    /// the push's transaction), then rolled back; `written` and `fingerprint` are what a push
    /// would give.
    pub dry_run: bool,
}

/// Why a push wrote nothing although it ran.
#[derive(Debug, Clone)]
pub enum PushOutcome {
    /// Written (or already there).
    Done(Pushed),
    /// Conflicts or collisions left unresolved: nothing was written; the plan says which.
    Refused(Box<MergePlan>),
}

/// How long a push waits for another push of the same campaign before it gives up.
pub const LOCK_WAIT: Duration = Duration::from_secs(120);

/// Push `local` (a campaign file's rows) into the archive, waiting at most [`LOCK_WAIT`]
/// for other pushes of the same campaign.
///
/// # Errors
/// A server error (after [`ATTEMPTS`] tries for serialisation failures and deadlocks), or
/// [`ArchiveError::Busy`] when another push held the campaign too long.
pub fn push(client: &mut Client, local: &CampaignRows, prefs: &Preferences) -> Result<PushOutcome> {
    push_waiting(client, local, prefs, LOCK_WAIT)
}

/// [`push`], waiting at most `wait` for the campaign's lock.
///
/// # Errors
/// As [`push`].
pub fn push_waiting(
    client: &mut Client,
    local: &CampaignRows,
    prefs: &Preferences,
    wait: Duration,
) -> Result<PushOutcome> {
    attempt(client, local, prefs, wait, false)
}

/// What [`push`] would do, with nothing written: the same plan (conflicts refuse it the
/// same way); a campaign the archive already has is written inside the push's transaction,
/// which is then rolled back, so the counts and the fingerprint are exactly a push's.
///
/// # Errors
/// As [`push`].
pub fn preview(
    client: &mut Client,
    local: &CampaignRows,
    prefs: &Preferences,
) -> Result<PushOutcome> {
    attempt(client, local, prefs, LOCK_WAIT, true)
}

/// [`push_waiting`], or its dry run.
fn attempt(
    client: &mut Client,
    local: &CampaignRows,
    prefs: &Preferences,
    wait: Duration,
    dry_run: bool,
) -> Result<PushOutcome> {
    let local_fingerprint = fingerprint(local);
    let mut attempt = 0;
    loop {
        attempt += 1;
        let tx = client
            .transaction()
            .map_err(server("cannot start the push"))?;
        match push_once(tx, local, &local_fingerprint, prefs, wait, dry_run) {
            Ok(PushOutcome::Done(mut done)) => {
                done.attempts = attempt;
                return Ok(PushOutcome::Done(done));
            }
            Ok(refused) => return Ok(refused),
            Err(ArchiveError::Server { source, .. })
                if attempt < ATTEMPTS && retryable(&source) =>
            {
                std::thread::sleep(Duration::from_millis(50 * u64::from(attempt)));
            }
            Err(ArchiveError::Server { source, .. })
                if source.code() == Some(&SqlState::LOCK_NOT_AVAILABLE) =>
            {
                return Err(ArchiveError::Busy {
                    campaign: local.campaign.uid.clone(),
                    waited: wait,
                });
            }
            Err(e) => return Err(e),
        }
    }
}

/// A serialisation failure or a deadlock: the transaction may succeed when tried again.
fn retryable(e: &postgres::Error) -> bool {
    e.code().is_some_and(|c| {
        *c == SqlState::T_R_SERIALIZATION_FAILURE || *c == SqlState::T_R_DEADLOCK_DETECTED
    })
}

fn push_once(
    mut tx: Transaction<'_>,
    local: &CampaignRows,
    local_fingerprint: &str,
    prefs: &Preferences,
    wait: Duration,
    dry_run: bool,
) -> Result<PushOutcome> {
    tx.batch_execute(&format!(
        "SET CONSTRAINTS ALL DEFERRED; SET LOCAL lock_timeout = {}",
        wait.as_millis().max(1)
    ))
    .map_err(server("cannot set up the push"))?;
    let uid = &local.campaign.uid;
    // A new campaign gets its row first, so there is a row to lock; a push running at the
    // same time waits here until this one commits, then finds the row.
    let created = tx
        .execute(
            "INSERT INTO campaign (uid, name, description, fc_kpa, pwp_kpa, created_at,
                                   texture_prior_max_readings, pushes)
             VALUES ($1, $2, $3, $4, $5, $6, $7, 0) ON CONFLICT (uid) DO NOTHING",
            &[
                uid,
                &local.campaign.name,
                &local.campaign.description,
                &local.campaign.fc_kpa,
                &local.campaign.pwp_kpa,
                &local.campaign.created_at,
                &local.campaign.texture_prior_max_readings,
            ],
        )
        .map_err(server("cannot add the campaign"))?
        == 1;
    let stored: Option<String> = tx
        .query_one(
            "SELECT fingerprint FROM campaign WHERE uid = $1 FOR UPDATE",
            &[uid],
        )
        .map_err(server("cannot lock the campaign"))?
        .get(0);
    if stored.as_deref() == Some(local_fingerprint) {
        // The archive holds exactly this content: nothing to compare or write.
        tx.rollback().map_err(server("cannot end the push"))?;
        return Ok(PushOutcome::Done(Pushed {
            report: "the archive already holds exactly this campaign: nothing to write\n".into(),
            written: 0,
            unchanged: true,
            created: false,
            fingerprint: local_fingerprint.to_string(),
            attempts: 1,
            dry_run,
        }));
    }
    if created && dry_run {
        // New to the archive: every row would be written; nothing to compare.
        tx.rollback().map_err(server("cannot end the push"))?;
        let rows = NewRows::all(local).len();
        return Ok(PushOutcome::Done(Pushed {
            report: format!("new campaign for the archive: {rows} rows\n"),
            written: rows,
            unchanged: false,
            created: true,
            fingerprint: local_fingerprint.to_string(),
            attempts: 1,
            dry_run,
        }));
    }
    if created {
        // New to the archive: every row is new (the plan against an empty campaign would say
        // so), written without holding a second copy of them.
        let all = NewRows::all(local);
        insert(&mut tx, &local.campaign, &all)?;
        record(&mut tx, uid, local_fingerprint)?;
        tx.commit().map_err(server("cannot commit the push"))?;
        return Ok(PushOutcome::Done(Pushed {
            report: format!(
                "new campaign in the archive: {} rows ({} sites, {} samples, {} readings, {} fits, {} logger records)\n",
                all.len(),
                local.sites.len(),
                local.samples.len(),
                local.readings.len(),
                local.fits.len(),
                local.logger_records()
            ),
            written: all.len(),
            unchanged: false,
            created: true,
            fingerprint: local_fingerprint.to_string(),
            attempts: 1,
            dry_run,
        }));
    }
    let on_server = read_campaign(&mut tx, uid)?.ok_or_else(|| {
        ArchiveError::Invalid(format!(
            "campaign {uid} vanished from the archive during the push"
        ))
    })?;
    let plan = plan(&on_server, local, prefs);
    if !plan.is_clean() {
        tx.rollback().map_err(server("cannot end the push"))?;
        return Ok(PushOutcome::Refused(Box::new(plan)));
    }
    let mut after = plan.merged(&on_server);
    // Which fits still match their readings in the merged campaign, as a pulled file will
    // tell (a flag pushed later makes a fit stale; an unflag fresh again).
    let settled = settle_freshness(&mut after, &[&on_server, local]);
    let written = apply(&mut tx, &on_server, &plan, &after, &settled)?;
    let print = fingerprint(&after);
    record(&mut tx, uid, &print)?;
    if dry_run {
        tx.rollback().map_err(server("cannot end the push"))?;
    } else {
        tx.commit().map_err(server("cannot commit the push"))?;
    }
    Ok(PushOutcome::Done(Pushed {
        report: plan.render(),
        written,
        unchanged: false,
        created: false,
        fingerprint: print,
        attempts: 1,
        dry_run,
    }))
}

/// Note a push on the campaign row: its new fingerprint, one more push, when.
fn record(tx: &mut Transaction<'_>, uid: &str, print: &str) -> Result<()> {
    tx.execute(
        "UPDATE campaign SET fingerprint = $2, pushes = pushes + 1, last_pushed_at = now()
         WHERE uid = $1",
        &[&uid, &print],
    )
    .map_err(server("cannot record the push"))?;
    Ok(())
}

/// Write a clean plan into the archive: the campaign row, replaced rows (deleted, then
/// written with the new rows), the current fits, so that the archive holds `after` (the
/// engine's [`MergePlan::merged`]). Returns the rows written.
fn apply(
    tx: &mut Transaction<'_>,
    on_server: &CampaignRows,
    plan: &MergePlan,
    after: &CampaignRows,
    settled: &[String],
) -> Result<usize> {
    let campaign = plan.campaign.as_ref().unwrap_or(&on_server.campaign);
    if let Some(c) = &plan.campaign {
        upsert_campaign(tx, c)?;
    }
    delete_replaced(tx, &campaign.uid, &plan.replace)?;
    let mut rows = rowset_rows(&plan.insert);
    rows.extend(rowset_rows(&plan.replace));
    // Written fits stand as the merged campaign has them (the engine decides which fit of a
    // sample is current, `settle_freshness` whether it matches its readings), not as the row
    // came.
    let standing: HashMap<&str, &FitRow> = after.fits.iter().map(|f| (f.uid.as_str(), f)).collect();
    let fits: Vec<FitRow> = rows
        .fits
        .iter()
        .map(|f| match standing.get(f.uid.as_str()) {
            Some(s) => FitRow {
                is_current: s.is_current,
                readings_key: s.readings_key.clone(),
                joint: s.joint.clone(),
                ..(*f).clone()
            },
            None => FitRow {
                is_current: false,
                ..(*f).clone()
            },
        })
        .collect();
    rows.fits = fits.iter().collect();
    insert(tx, campaign, &rows)?;
    // Fits already in the archive whose standing moved.
    let written_now: std::collections::HashSet<&str> =
        fits.iter().map(|f| f.uid.as_str()).collect();
    for uid in settled.iter().filter(|u| !written_now.contains(u.as_str())) {
        if let Some(f) = standing.get(uid.as_str()) {
            tx.execute(
                "UPDATE fit SET readings_key = $3, joint = $4 WHERE campaign_uid = $1 AND uid = $2",
                &[&campaign.uid, uid, &f.readings_key, &f.joint],
            )
            .map_err(server("cannot record which fits match their readings"))?;
        }
    }
    let written = rows.len() + usize::from(plan.campaign.is_some());
    for (sample, fit) in &plan.current {
        tx.execute(
            "UPDATE fit SET is_current = (uid = $3)
             WHERE campaign_uid = $1 AND sample_uid = $2 AND (is_current OR uid = $3)",
            &[&campaign.uid, sample, fit],
        )
        .map_err(server("cannot set the current fit"))?;
    }
    Ok(written)
}

/// The rows of a [`RowSet`] as rows to write.
fn rowset_rows(set: &RowSet) -> NewRows<'_> {
    NewRows {
        batches: set.batches.iter().collect(),
        sites: set.sites.iter().collect(),
        layers: set.layers.iter().collect(),
        samples: set.samples.iter().collect(),
        readings: set.readings.iter().collect(),
        conductivity: set.conductivity.iter().collect(),
        logger: set
            .logger
            .iter()
            .flat_map(|s| s.points.iter().map(move |p| (s, p)))
            .collect(),
        flags: set.flags.iter().collect(),
        flag_events: set.flag_events.iter().collect(),
        fits: set.fits.iter().collect(),
    }
}

impl<'a> NewRows<'a> {
    /// Both sets of rows together.
    fn extend(&mut self, other: NewRows<'a>) {
        self.batches.extend(other.batches);
        self.sites.extend(other.sites);
        self.layers.extend(other.layers);
        self.samples.extend(other.samples);
        self.readings.extend(other.readings);
        self.conductivity.extend(other.conductivity);
        self.logger.extend(other.logger);
        self.flags.extend(other.flags);
        self.flag_events.extend(other.flag_events);
        self.fits.extend(other.fits);
    }
}

/// Delete the archive's versions of the rows a plan replaces (keys are deferred, so their
/// children may point at them until the new versions are written).
fn delete_replaced(tx: &mut Transaction<'_>, campaign: &str, set: &RowSet) -> Result<()> {
    let by_uid: [(&str, Vec<&str>); 9] = [
        (
            "import_batch",
            set.batches.iter().map(|r| r.uid.as_str()).collect(),
        ),
        ("site", set.sites.iter().map(|r| r.uid.as_str()).collect()),
        ("layer", set.layers.iter().map(|r| r.uid.as_str()).collect()),
        (
            "sample",
            set.samples.iter().map(|r| r.uid.as_str()).collect(),
        ),
        (
            "reading",
            set.readings.iter().map(|r| r.uid.as_str()).collect(),
        ),
        (
            "conductivity_reading",
            set.conductivity.iter().map(|r| r.uid.as_str()).collect(),
        ),
        ("flag", set.flags.iter().map(|r| r.uid.as_str()).collect()),
        (
            "flag_event",
            set.flag_events.iter().map(|r| r.uid.as_str()).collect(),
        ),
        ("fit", set.fits.iter().map(|r| r.uid.as_str()).collect()),
    ];
    for (table, uids) in by_uid {
        if uids.is_empty() {
            continue;
        }
        tx.execute(
            &format!("DELETE FROM {table} WHERE campaign_uid = $1 AND uid = ANY($2)"),
            &[&campaign, &uids],
        )
        .map_err(server(format!("cannot replace {table} rows")))?;
    }
    for s in &set.logger {
        let times: Vec<&str> = s.points.iter().map(|p| p.time.as_str()).collect();
        tx.execute(
            "DELETE FROM logger_record
             WHERE campaign_uid = $1 AND site_uid = $2 AND sensor_id = $3 AND time = ANY($4)",
            &[&campaign, &s.site_uid, &s.sensor_id, &times],
        )
        .map_err(server("cannot replace logger records"))?;
    }
    Ok(())
}
