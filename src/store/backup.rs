//! A consistent copy of a campaign while it is in use (the terminal UI open, a fit running):
//! SQLite's online backup read from one snapshot, written to a partial file beside the target,
//! checked (`PRAGMA integrity_check`, the row count of every table against the snapshot's) and
//! only then renamed into place. A failure leaves no file at the target.

use std::path::{Path, PathBuf};
use std::time::Duration;

use rusqlite::backup::{Backup, StepResult};
use rusqlite::{Connection, OpenFlags};

use super::{Result, StoreError};

/// Pages copied per backup step: small enough for a progress bar, large enough not to matter.
pub const PAGES_PER_STEP: i32 = 1024;

/// How long to wait before a step that found the target busy or locked is tried again.
const RETRY_PAUSE: Duration = Duration::from_millis(20);

/// What a verified backup holds.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct BackupSummary {
    /// The copy, renamed into place.
    pub target: PathBuf,
    /// Database pages copied.
    pub pages: u64,
    /// Size of the copy, bytes.
    pub bytes: u64,
    /// Every table of the campaign with its row count, the same in the copy as in the snapshot
    /// it was taken from.
    pub tables: Vec<(String, i64)>,
}

/// Copy the campaign on `source` to `target`. `replace` allows an existing `target` to be
/// replaced (atomically, by rename); otherwise an existing file is refused. `progress` gets
/// (pages copied, pages in all) after each step.
///
/// The source connection keeps one read transaction open for the whole copy, so in WAL mode
/// writers go on and the copy is the campaign as it was when the backup began.
///
/// # Errors
/// The target exists (and `replace` is off), its folder cannot be written, SQLite fails, or
/// the copy does not verify (the partial file is then removed).
pub fn backup_to(
    source: &Connection,
    target: &Path,
    replace: bool,
    progress: impl FnMut(u64, u64),
) -> Result<BackupSummary> {
    backup_in_steps(source, target, replace, PAGES_PER_STEP, progress)
}

/// As [`backup_to`], `pages_per_step` pages at a time (tests take small steps to write to the
/// campaign between them).
///
/// # Errors
/// As [`backup_to`].
pub fn backup_in_steps(
    source: &Connection,
    target: &Path,
    replace: bool,
    pages_per_step: i32,
    mut progress: impl FnMut(u64, u64),
) -> Result<BackupSummary> {
    if target.is_dir() {
        return Err(StoreError::Unwritable {
            path: target.to_path_buf(),
            reason: "it is a folder; give the backup a file name".into(),
        });
    }
    if !replace && target.exists() {
        return Err(StoreError::Exists(target.to_path_buf()));
    }
    let folder = target
        .parent()
        .filter(|p| !p.as_os_str().is_empty())
        .unwrap_or(Path::new("."));
    if !folder.is_dir() {
        return Err(StoreError::Unwritable {
            path: target.to_path_buf(),
            reason: format!("the folder {} does not exist", folder.display()),
        });
    }
    let partial = partial_path(target);
    remove_with_journals(&partial);
    let outcome = copy_and_verify(source, &partial, pages_per_step.max(1), &mut progress).and_then(
        |(pages, tables)| {
            let bytes = std::fs::metadata(&partial).map_or(0, |m| m.len());
            std::fs::rename(&partial, target).map_err(|source| StoreError::Io {
                path: target.to_path_buf(),
                source,
            })?;
            sync_folder(target);
            Ok(BackupSummary {
                target: target.to_path_buf(),
                pages,
                bytes,
                tables,
            })
        },
    );
    if outcome.is_err() {
        remove_with_journals(&partial);
    }
    outcome
}

/// The copy and its check, into `partial`; returns the pages copied and the table counts.
fn copy_and_verify(
    source: &Connection,
    partial: &Path,
    pages_per_step: i32,
    progress: &mut impl FnMut(u64, u64),
) -> Result<(u64, Vec<(String, i64)>)> {
    let mut copy = Connection::open_with_flags(
        partial,
        OpenFlags::SQLITE_OPEN_READ_WRITE | OpenFlags::SQLITE_OPEN_CREATE,
    )
    .map_err(|e| StoreError::Unwritable {
        path: partial.to_path_buf(),
        reason: e.to_string(),
    })?;
    // One snapshot: the counts and every page of the copy are read inside this transaction.
    source.execute_batch("BEGIN DEFERRED")?;
    let copied = (|| -> Result<(u64, Vec<(String, i64)>)> {
        let expected = table_counts(source)?;
        let pages = {
            let backup = Backup::new(source, &mut copy)?;
            loop {
                let step = backup.step(pages_per_step)?;
                let p = backup.progress();
                let total = u64::try_from(p.pagecount).unwrap_or(0);
                let left = u64::try_from(p.remaining).unwrap_or(0);
                progress(total.saturating_sub(left), total);
                match step {
                    StepResult::Done => break total,
                    StepResult::More => {}
                    // Busy or locked: the target is in use for a moment.
                    _ => std::thread::sleep(RETRY_PAUSE),
                }
            }
        };
        Ok((pages, expected))
    })();
    source.execute_batch("COMMIT")?;
    let (pages, expected) = copied?;
    verify(&copy, partial, &expected)?;
    // Fold the copy's WAL into the file, so it stands alone once renamed.
    copy.pragma_update(None, "journal_mode", "DELETE")?;
    copy.close().map_err(|(_, e)| StoreError::Sqlite(e))?;
    std::fs::File::open(partial)
        .and_then(|f| f.sync_all())
        .map_err(|source| StoreError::Io {
            path: partial.to_path_buf(),
            source,
        })?;
    Ok((pages, expected))
}

/// `PRAGMA integrity_check` of the copy, and its row counts against `expected`.
fn verify(copy: &Connection, partial: &Path, expected: &[(String, i64)]) -> Result<()> {
    let check: Vec<String> = copy
        .prepare("PRAGMA integrity_check")?
        .query_map([], |r| r.get(0))?
        .collect::<rusqlite::Result<_>>()?;
    if check != ["ok"] {
        return Err(StoreError::BackupUnverified(format!(
            "PRAGMA integrity_check of {}: {}",
            partial.display(),
            check.into_iter().take(3).collect::<Vec<_>>().join("; ")
        )));
    }
    let found = table_counts(copy)?;
    if found != expected {
        let differ: Vec<String> = expected
            .iter()
            .filter(|e| !found.contains(e))
            .map(|(t, n)| format!("{t} {n}"))
            .collect();
        return Err(StoreError::BackupUnverified(format!(
            "its row counts differ from the campaign's ({})",
            differ.join(", ")
        )));
    }
    Ok(())
}

/// Every ordinary table (SQLite's own left out) with its row count, by name.
///
/// # Errors
/// An SQLite error.
pub fn table_counts(conn: &Connection) -> Result<Vec<(String, i64)>> {
    let names: Vec<String> = conn
        .prepare(
            "SELECT name FROM sqlite_schema WHERE type = 'table' AND name NOT LIKE 'sqlite_%' \
             ORDER BY name",
        )?
        .query_map([], |r| r.get(0))?
        .collect::<rusqlite::Result<_>>()?;
    names
        .into_iter()
        .map(|name| {
            let quoted = name.replace('"', "\"\"");
            let n: i64 =
                conn.query_row(&format!("SELECT count(*) FROM \"{quoted}\""), [], |r| {
                    r.get(0)
                })?;
            Ok((name, n))
        })
        .collect()
}

/// The partial file beside `target`: hidden, named after it and this process.
fn partial_path(target: &Path) -> PathBuf {
    let name = target
        .file_name()
        .map_or_else(|| "backup".into(), |n| n.to_string_lossy().into_owned());
    target.with_file_name(format!(".{name}.partial-{}", std::process::id()))
}

/// Remove a file and the journal files SQLite may have left beside it.
fn remove_with_journals(path: &Path) {
    for suffix in ["", "-wal", "-shm", "-journal"] {
        let mut p = path.as_os_str().to_owned();
        p.push(suffix);
        let _ = std::fs::remove_file(PathBuf::from(p));
    }
}

/// Make the rename durable (the folder's entry), where the platform allows it.
fn sync_folder(target: &Path) {
    let folder = target
        .parent()
        .filter(|p| !p.as_os_str().is_empty())
        .unwrap_or(Path::new("."));
    if let Ok(dir) = std::fs::File::open(folder) {
        let _ = dir.sync_all();
    }
}
