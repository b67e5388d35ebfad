//! What the archive holds: one line per campaign.

use postgres::Client;
use serde::Serialize;

use super::{Result, server};

/// One campaign in the archive.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ArchivedCampaign {
    /// The campaign's uid (the same in every copy of its file).
    pub uid: String,
    /// Its name.
    pub name: String,
    /// Number of sites, samples, current fits and logger records on the server.
    pub sites: i64,
    /// Samples.
    pub samples: i64,
    /// Current fits.
    pub current_fits: i64,
    /// Logger records.
    pub logger_records: i64,
    /// How many pushes changed or confirmed it.
    pub pushes: i64,
    /// The last push, UTC, `YYYY-MM-DDTHH:MM:SSZ`.
    pub last_pushed_at: String,
    /// The content fingerprint of the last push.
    pub fingerprint: Option<String>,
}

/// Every campaign of the archive, by name then uid.
///
/// # Errors
/// A server error.
pub fn campaigns(client: &mut Client) -> Result<Vec<ArchivedCampaign>> {
    let rows = client
        .query(
            "SELECT c.uid, c.name,
                    (SELECT count(*) FROM site x WHERE x.campaign_uid = c.uid),
                    (SELECT count(*) FROM sample x WHERE x.campaign_uid = c.uid),
                    (SELECT count(*) FROM fit x WHERE x.campaign_uid = c.uid AND x.is_current),
                    (SELECT count(*) FROM logger_record x WHERE x.campaign_uid = c.uid),
                    c.pushes,
                    to_char(c.last_pushed_at AT TIME ZONE 'UTC', 'YYYY-MM-DD\"T\"HH24:MI:SS\"Z\"'),
                    c.fingerprint
             FROM campaign c ORDER BY c.name, c.uid",
            &[],
        )
        .map_err(server("cannot list the archive's campaigns"))?;
    Ok(rows
        .iter()
        .map(|r| ArchivedCampaign {
            uid: r.get(0),
            name: r.get(1),
            sites: r.get(2),
            samples: r.get(3),
            current_fits: r.get(4),
            logger_records: r.get(5),
            pushes: r.get(6),
            last_pushed_at: r.get(7),
            fingerprint: r.get(8),
        })
        .collect())
}
