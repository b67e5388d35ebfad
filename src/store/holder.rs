//! The writer note: which porewise command holds a campaign file's write lock.
//!
//! SQLite lets one writer at a time into a file; another writer waits up to the busy timeout
//! ([`super::db::BUSY_TIMEOUT`]) and then fails with "database is locked", which does not say
//! who is writing. So every write transaction of a campaign file writes a small note beside it,
//! `<file>-writer`, as soon as it holds the write lock, and removes it when the transaction
//! ends (committed or rolled back). A writer that gives up reads the note and names the
//! command, its process id and since when it has been writing.
//!
//! The note is advisory: it is never synced to disk, a folder that cannot be written gets
//! none, and a process killed while writing leaves its note behind until the next writer
//! replaces it (a reader checks on Linux whether that process still runs and says so).
//! Format, one `key=value` per line: `command`, `pid`, `since` (UTC, RFC 3339).

use std::fmt;
use std::path::{Path, PathBuf};
use std::sync::OnceLock;

use chrono::{SecondsFormat, Utc};

static COMMAND: OnceLock<String> = OnceLock::new();

/// Name this process in writer notes (`porewise fit`, `porewise import lab`, ...). Only the
/// first call counts; the command line sets it once at start.
pub fn set_command(command: impl Into<String>) {
    let _ = COMMAND.set(command.into());
}

/// The name this process gives in its writer notes.
pub fn command() -> &'static str {
    COMMAND.get().map_or("porewise", String::as_str)
}

/// The note file of a campaign file: `<file>-writer`, beside its `-wal` and `-shm` files.
pub fn note_path(db: &Path) -> PathBuf {
    let mut name = db.as_os_str().to_owned();
    name.push("-writer");
    PathBuf::from(name)
}

/// This process's note beside a campaign file; removed when dropped (if it is still ours).
#[derive(Debug)]
pub struct Note {
    path: PathBuf,
}

impl Note {
    /// Write the note for `db` (best effort: `None` when the folder cannot be written).
    pub fn write(db: &Path) -> Option<Note> {
        let path = note_path(db);
        let text = format!(
            "command={}\npid={}\nsince={}\n",
            command().replace('\n', " "),
            std::process::id(),
            Utc::now().to_rfc3339_opts(SecondsFormat::Secs, true)
        );
        std::fs::write(&path, text).ok()?;
        Some(Note { path })
    }
}

impl Drop for Note {
    fn drop(&mut self) {
        // Another writer may have replaced a note we thought ours only if our lock was gone;
        // remove it only while it still names this process.
        let ours = std::fs::read_to_string(&self.path)
            .ok()
            .and_then(|t| Holder::parse(&t))
            .is_some_and(|h| h.pid == std::process::id());
        if ours {
            let _ = std::fs::remove_file(&self.path);
        }
    }
}

/// A writer as its note describes it.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Holder {
    /// The command (`porewise import logger`).
    pub command: String,
    /// Its process id.
    pub pid: u32,
    /// When it began writing (UTC, RFC 3339).
    pub since: String,
    /// Whether that process still runs (`None` where this cannot be told).
    pub running: Option<bool>,
}

impl Holder {
    fn parse(text: &str) -> Option<Holder> {
        let mut command = None;
        let mut pid = None;
        let mut since = None;
        for line in text.lines() {
            match line.split_once('=') {
                Some(("command", v)) => command = Some(v.to_string()),
                Some(("pid", v)) => pid = v.trim().parse().ok(),
                Some(("since", v)) => since = Some(v.to_string()),
                _ => {}
            }
        }
        Some(Holder {
            command: command?,
            pid: pid?,
            since: since?,
            running: None,
        })
    }
}

impl fmt::Display for Holder {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(
            f,
            "`{}` (process {}, writing since {})",
            self.command, self.pid, self.since
        )?;
        if self.running == Some(false) {
            f.write_str(", though that process is no longer running")?;
        }
        Ok(())
    }
}

/// Whether a process runs, where the system tells (Linux: `/proc/<pid>`).
pub fn process_running(pid: u32) -> Option<bool> {
    let proc = Path::new("/proc");
    proc.join("self")
        .exists()
        .then(|| proc.join(pid.to_string()).exists())
}

/// The writer noted beside `db`, if a note is there and reads back.
pub fn read(db: &Path) -> Option<Holder> {
    let text = std::fs::read_to_string(note_path(db)).ok()?;
    let mut holder = Holder::parse(&text)?;
    holder.running = process_running(holder.pid);
    Some(holder)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_note_reads_back_and_goes_away() {
        let dir = tempfile::tempdir().expect("temp dir");
        let db = dir.path().join("c.sqlite");
        assert_eq!(read(&db), None);
        let note = Note::write(&db).expect("writable folder");
        let holder = read(&db).expect("note");
        assert_eq!(holder.pid, std::process::id());
        assert_eq!(holder.command, command());
        assert_ne!(holder.running, Some(false));
        assert!(
            holder
                .to_string()
                .contains(&format!("process {}", holder.pid))
        );
        drop(note);
        assert!(!note_path(&db).exists());
    }

    #[test]
    fn a_note_of_another_process_is_left_alone() {
        let dir = tempfile::tempdir().expect("temp dir");
        let db = dir.path().join("c.sqlite");
        let note = Note::write(&db).expect("writable folder");
        std::fs::write(
            note_path(&db),
            "command=porewise fit\npid=4294967295\nsince=2026-01-01T00:00:00Z\n",
        )
        .expect("replace");
        drop(note);
        let holder = read(&db).expect("still there");
        assert_eq!(holder.command, "porewise fit");
        if holder.running.is_some() {
            assert!(holder.to_string().contains("no longer running"), "{holder}");
        }
        assert_eq!(Holder::parse("pid=12\n"), None);
    }
}
