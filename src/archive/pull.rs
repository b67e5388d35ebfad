//! Pull: one campaign of the archive as an ordinary campaign file, for offline work. The
//! server's rows are read in one consistent snapshot, the merge engine's plan that recreates
//! them ([`crate::store::exchange::recreate`]) is applied to a new file made as `porewise
//! init` makes one, and the file is renamed into place only once it is complete and its
//! fingerprint matches the archive's rows.

use std::path::{Path, PathBuf};

use postgres::{Client, IsolationLevel};

use super::rows::{find_campaign, read_campaign};
use super::{ArchiveError, Result, server};
use crate::store::Campaign;
use crate::store::campaign::remove_with_journal;
use crate::store::exchange::{self, fingerprint, recreate};

/// What a pull wrote.
#[derive(Debug, Clone)]
pub struct Pulled {
    /// The campaign's uid.
    pub uid: String,
    /// Its name.
    pub name: String,
    /// The file written.
    pub path: PathBuf,
    /// The content fingerprint, the same for the archive's rows and the new file.
    pub fingerprint: String,
    /// Sites, samples, readings, fits and logger records written.
    pub counts: [usize; 5],
}

/// Write the archive's campaign `name_or_uid` to the new file `out` (never over an existing
/// file; nothing is left behind on failure).
///
/// # Errors
/// No such campaign (or an ambiguous name), `out` exists, a server or SQLite error, or a
/// file whose fingerprint differs from the archive's rows (it is removed).
pub fn pull(client: &mut Client, name_or_uid: &str, out: &Path) -> Result<Pulled> {
    if out.exists() {
        return Err(ArchiveError::Invalid(format!(
            "{} exists; pull writes a new campaign file (choose another name)",
            out.display()
        )));
    }
    let mut tx = client
        .build_transaction()
        .isolation_level(IsolationLevel::RepeatableRead)
        .read_only(true)
        .start()
        .map_err(server("cannot start reading the archive"))?;
    let campaign = find_campaign(&mut tx, name_or_uid)?;
    let rows = read_campaign(&mut tx, &campaign.uid)?.ok_or_else(|| {
        ArchiveError::Invalid(format!(
            "campaign {} vanished from the archive",
            campaign.uid
        ))
    })?;
    tx.commit()
        .map_err(server("cannot end reading the archive"))?;
    let print = fingerprint(&rows);
    let staging = staging_path(out);
    let written = write_file(&staging, &rows).and_then(|()| {
        let copy = exchange::read(&rusqlite::Connection::open(&staging).map_err(|e| local(&e))?)
            .map_err(|e| ArchiveError::Invalid(format!("cannot read the pulled file back: {e}")))?;
        if fingerprint(&copy) == print {
            Ok(())
        } else {
            Err(ArchiveError::Invalid(
                "the pulled file does not hold the archive's rows exactly; nothing was written"
                    .into(),
            ))
        }
    });
    if let Err(e) = written {
        remove_with_journal(&staging);
        return Err(e);
    }
    if out.exists() {
        remove_with_journal(&staging);
        return Err(ArchiveError::Invalid(format!(
            "{} appeared while pulling; nothing was written over it",
            out.display()
        )));
    }
    std::fs::rename(&staging, out).map_err(|e| {
        remove_with_journal(&staging);
        ArchiveError::Invalid(format!(
            "cannot move the pulled file to {}: {e}",
            out.display()
        ))
    })?;
    Ok(Pulled {
        uid: rows.campaign.uid.clone(),
        name: rows.campaign.name.clone(),
        path: out.to_path_buf(),
        fingerprint: print,
        counts: [
            rows.sites.len(),
            rows.samples.len(),
            rows.readings.len(),
            rows.fits.len(),
            rows.logger_records(),
        ],
    })
}

fn local(e: &rusqlite::Error) -> ArchiveError {
    ArchiveError::Invalid(format!("the pulled file: {e}"))
}

/// `.NAME.pull-PID.tmp` beside `out`.
fn staging_path(out: &Path) -> PathBuf {
    let name = out
        .file_name()
        .map_or_else(|| "campaign".into(), |n| n.to_string_lossy().into_owned());
    out.with_file_name(format!(".{name}.pull-{}.tmp", std::process::id()))
}

/// A new campaign file at `path` holding exactly `rows`, in one transaction.
fn write_file(path: &Path, rows: &exchange::CampaignRows) -> Result<()> {
    let c = &rows.campaign;
    let mut campaign = Campaign::create(path, &c.name, c.fc_kpa, c.pwp_kpa)
        .map_err(|e| ArchiveError::Invalid(format!("cannot create {}: {e}", path.display())))?;
    let plan = recreate(rows);
    if !plan.is_clean() {
        return Err(ArchiveError::Invalid(format!(
            "the archive's rows of {} do not make a campaign:\n{}",
            c.uid,
            plan.render()
        )));
    }
    let tx = campaign
        .transaction()
        .map_err(|e| ArchiveError::Invalid(format!("{}: {e}", path.display())))?;
    exchange::apply(&tx, &plan)
        .map_err(|e| ArchiveError::Invalid(format!("cannot write {}: {e}", path.display())))?;
    tx.commit().map_err(|e| local(&e))?;
    Ok(())
}
