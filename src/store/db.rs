//! Opening a connection and setting its per-connection PRAGMAs.
//!
//! SQLite keeps foreign keys off, the rollback journal on and a zero busy timeout unless every
//! connection asks otherwise, so every connection porewise opens goes through [`configure`].

use std::path::Path;
use std::time::Duration;

use rusqlite::{Connection, OpenFlags};

use super::{Result, StoreError};

/// How long a connection waits for another writer before giving up.
pub const BUSY_TIMEOUT: Duration = Duration::from_secs(5);

/// Page cache per connection, as SQLite's negative `cache_size` (KiB).
pub const CACHE_SIZE_KIB: i64 = -32_768;

/// Open an existing file read-write (never creates one).
///
/// # Errors
/// The file is missing ([`StoreError::NotFound`]) or SQLite cannot open it.
pub fn open_existing(path: &Path) -> Result<Connection> {
    if !path.is_file() {
        return Err(StoreError::NotFound(path.to_path_buf()));
    }
    let flags = OpenFlags::SQLITE_OPEN_READ_WRITE | OpenFlags::SQLITE_OPEN_NO_MUTEX;
    Ok(Connection::open_with_flags(path, flags)?)
}

/// Set the PRAGMAs every porewise connection needs: foreign keys on, WAL journal (for a file),
/// synchronous FULL (a field laptop can lose power mid-write), a busy timeout and a larger
/// page cache.
///
/// # Errors
/// SQLite refuses a PRAGMA; for a file that is not a database this is the first thing to fail.
pub fn configure(conn: &Connection) -> Result<()> {
    conn.busy_timeout(BUSY_TIMEOUT)?;
    conn.pragma_update(None, "foreign_keys", true)?;
    let mode: String = conn.pragma_update_and_check(None, "journal_mode", "WAL", |r| r.get(0))?;
    if mode != "wal" && mode != "memory" {
        return Err(StoreError::Corrupt(format!(
            "journal mode {mode:?} instead of WAL"
        )));
    }
    conn.pragma_update(None, "synchronous", "FULL")?;
    // 32 MiB of page cache (the default is 2 MiB): the random uid indexes of a large import
    // then stay in memory.
    conn.pragma_update(None, "cache_size", CACHE_SIZE_KIB)?;
    Ok(())
}
