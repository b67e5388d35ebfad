//! The archive's server schema: the numbered files of `pg_migrations/`, applied in order in
//! one transaction each, under an advisory lock so two `archive init`s at once do not race,
//! and recorded in `archive_migration` (version, name, when).

use postgres::Client;

use super::target::Target;
use super::{ArchiveError, Result, server};

/// The server migrations, oldest first: (version, name, SQL). A landed one is never edited.
pub const MIGRATIONS: &[(i64, &str, &str)] = &[(
    1,
    "0001_archive",
    include_str!("../../pg_migrations/0001_archive.sql"),
)];

/// The newest schema version this program knows.
pub fn known_version() -> i64 {
    MIGRATIONS.last().map_or(0, |m| m.0)
}

/// What [`migrate`] did.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Migrated {
    /// The version before.
    pub from: i64,
    /// The version now.
    pub to: i64,
    /// Names of the migrations applied now, in order.
    pub applied: Vec<String>,
}

/// Create the archive schema or bring it up to date; a second run applies nothing.
///
/// # Errors
/// A server error (nothing of a failed migration stays), or a schema newer than this
/// program.
pub fn migrate(client: &mut Client, target: &Target) -> Result<Migrated> {
    let schema = target.schema();
    let mut tx = client
        .transaction()
        .map_err(server("cannot start the migration"))?;
    tx.execute(
        "SELECT pg_advisory_xact_lock(hashtext('porewise archive migration ' || $1::text))",
        &[&schema],
    )
    .map_err(server("cannot lock the archive schema"))?;
    // Checked identifier: quoting is enough.
    tx.batch_execute(&format!(
        "CREATE SCHEMA IF NOT EXISTS \"{schema}\";
         CREATE TABLE IF NOT EXISTS \"{schema}\".archive_migration (
             version bigint PRIMARY KEY,
             name text NOT NULL,
             applied_at timestamptz NOT NULL DEFAULT now()
         );
         SET LOCAL search_path TO \"{schema}\";"
    ))
    .map_err(server(format!("cannot create the schema {schema:?}")))?;
    let from: i64 = tx
        .query_one(
            "SELECT coalesce(max(version), 0) FROM archive_migration",
            &[],
        )
        .map_err(server("cannot read the migration table"))?
        .get(0);
    let known = known_version();
    if from > known {
        return Err(ArchiveError::TooNew {
            schema: schema.to_string(),
            found: from,
            known,
        });
    }
    let mut applied = Vec::new();
    for (version, name, sql) in MIGRATIONS.iter().filter(|m| m.0 > from) {
        tx.batch_execute(sql)
            .map_err(server(format!("migration {name} failed")))?;
        tx.execute(
            "INSERT INTO archive_migration (version, name) VALUES ($1, $2)",
            &[version, name],
        )
        .map_err(server("cannot record the migration"))?;
        applied.push((*name).to_string());
    }
    tx.commit().map_err(server("cannot commit the migration"))?;
    Ok(Migrated {
        from,
        to: known,
        applied,
    })
}

/// Bring the schema up to date only when it is behind: a current schema is not touched, so
/// a user without the right to create schemas can still push to one set up by another.
///
/// # Errors
/// A server error, or a schema newer than this program.
pub fn ensure(client: &mut Client, target: &Target) -> Result<()> {
    if version(client, target)? == known_version() {
        return Ok(());
    }
    migrate(client, target).map(|_| ())
}

/// The archive's schema version on the server (0 when it has none).
///
/// # Errors
/// A server error.
pub fn version(client: &mut Client, target: &Target) -> Result<i64> {
    let row = client
        .query_one(
            "SELECT to_regclass(quote_ident($1) || '.archive_migration') IS NOT NULL",
            &[&target.schema()],
        )
        .map_err(server("cannot look for the archive schema"))?;
    if !row.get::<_, bool>(0) {
        return Ok(0);
    }
    Ok(client
        .query_one(
            "SELECT coalesce(max(version), 0) FROM archive_migration",
            &[],
        )
        .map_err(server("cannot read the migration table"))?
        .get(0))
}

/// Refuse to work on a schema that is missing, older or newer than this program's.
///
/// # Errors
/// [`ArchiveError::NotInitialised`], [`ArchiveError::TooNew`] or a server error.
pub fn check(client: &mut Client, target: &Target) -> Result<()> {
    let found = version(client, target)?;
    let known = known_version();
    if found > known {
        return Err(ArchiveError::TooNew {
            schema: target.schema().to_string(),
            found,
            known,
        });
    }
    if found < known {
        return Err(ArchiveError::NotInitialised {
            schema: target.schema().to_string(),
            shown: target.shown().to_string(),
            found,
            needed: known,
        });
    }
    Ok(())
}
