//! The campaign's texture-prior default (schema version 8).

use rusqlite::{Connection, params};

use super::{Result, StoreError};

/// The most readings a sample may have for `fit` to give it the texture prior without being
/// asked; `None` when the default is off.
///
/// # Errors
/// An SQLite error.
pub fn prior_default(conn: &Connection) -> Result<Option<u32>> {
    let v: Option<i64> = conn
        .prepare_cached("SELECT texture_prior_max_readings FROM campaign WHERE id = 1")?
        .query_row([], |r| r.get(0))?;
    v.map(|n| u32::try_from(n).map_err(|_| StoreError::Corrupt(format!("texture prior {n}"))))
        .transpose()
}

/// Set (or with `None` turn off) the texture-prior default.
///
/// # Errors
/// A value above 1000 (the schema's check) or an SQLite error.
pub fn set_prior_default(conn: &Connection, max_readings: Option<u32>) -> Result<()> {
    conn.prepare_cached("UPDATE campaign SET texture_prior_max_readings = ?1 WHERE id = 1")?
        .execute(params![max_readings])?;
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::store::Campaign;

    #[test]
    fn the_default_is_off_and_can_be_set() {
        let c = Campaign::in_memory("t", 33.0, 1500.0).expect("campaign");
        assert_eq!(prior_default(c.connection()).expect("reads"), None);
        set_prior_default(c.connection(), Some(5)).expect("sets");
        assert_eq!(prior_default(c.connection()).expect("reads"), Some(5));
        assert!(set_prior_default(c.connection(), Some(1001)).is_err());
        set_prior_default(c.connection(), None).expect("sets");
        assert_eq!(prior_default(c.connection()).expect("reads"), None);
    }
}
