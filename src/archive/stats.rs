//! A summary of the current fits of every campaign in the archive, computed on the server:
//! per model and quantity (each parameter, theta at field capacity and at the wilting point,
//! available water) the number of fits and campaigns, the quartiles (`percentile_cont`), the
//! extremes and the mean.

use postgres::Client;
use postgres::types::ToSql;
use serde::Serialize;

use super::{ArchiveError, Result, server};
use crate::model::texture::TextureClass;

/// Which current fits to summarise; every field narrows the set.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct StatsFilter {
    /// The layer's USDA class (computed from its sand, silt and clay at push).
    pub texture_class: Option<TextureClass>,
    /// The layer's horizon label, compared without regard to case.
    pub horizon: Option<String>,
    /// Layers overlapping this depth range (top, bottom), cm.
    pub depth_cm: Option<(f64, f64)>,
    /// The fit's model identifier (`van-genuchten`).
    pub model: Option<String>,
}

/// One line of the summary.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct StatRow {
    /// Model identifier.
    pub model: String,
    /// Parameter name (`alpha_per_cm`) or derived value (`available_water`, `theta_fc`,
    /// `theta_pwp`, in m3/m3).
    pub quantity: String,
    /// Number of current fits with a value.
    pub fits: i64,
    /// Number of campaigns they come from.
    pub campaigns: i64,
    /// Smallest value.
    pub min: f64,
    /// First quartile (continuous percentile).
    pub q1: f64,
    /// Median.
    pub median: f64,
    /// Third quartile.
    pub q3: f64,
    /// Largest value.
    pub max: f64,
    /// Arithmetic mean.
    pub mean: f64,
}

/// Parse `--depth-cm 0-30` (top and bottom in cm, top < bottom).
///
/// # Errors
/// Not two numbers separated by `-`, or top not above bottom.
pub fn parse_depth(text: &str) -> Result<(f64, f64)> {
    let bad = || {
        ArchiveError::Invalid(format!(
            "depth range {text:?}: write TOP-BOTTOM in cm, e.g. 0-30"
        ))
    };
    let (top, bottom) = text.trim().split_once('-').ok_or_else(bad)?;
    let top: f64 = top.trim().parse().map_err(|_| bad())?;
    let bottom: f64 = bottom.trim().parse().map_err(|_| bad())?;
    if !(top.is_finite() && bottom.is_finite() && top >= 0.0 && bottom > top) {
        return Err(bad());
    }
    Ok((top, bottom))
}

/// The summary, ordered by model and quantity (parameters first, then derived values).
///
/// # Errors
/// A server error.
pub fn stats(client: &mut Client, filter: &StatsFilter) -> Result<Vec<StatRow>> {
    let class = filter.texture_class.map(TextureClass::name);
    let (top, bottom) = filter.depth_cm.unzip();
    let params: [&(dyn ToSql + Sync); 5] = [&class, &filter.horizon, &top, &bottom, &filter.model];
    let rows = client
        .query(STATS_SQL, &params)
        .map_err(server("cannot summarise the archive"))?;
    Ok(rows
        .iter()
        .map(|r| StatRow {
            model: r.get(0),
            quantity: r.get(1),
            fits: r.get(2),
            campaigns: r.get(3),
            min: r.get(4),
            q1: r.get(5),
            median: r.get(6),
            q3: r.get(7),
            max: r.get(8),
            mean: r.get(9),
        })
        .collect())
}

/// $1 class name, $2 horizon, $3 / $4 depth range, $5 model; NULL means no filter.
const STATS_SQL: &str = "
WITH chosen AS (
    SELECT f.campaign_uid, f.model, f.parameters, f.theta_fc, f.theta_pwp, f.available_water
    FROM fit f
    JOIN sample s ON s.campaign_uid = f.campaign_uid AND s.uid = f.sample_uid
    JOIN layer l ON l.campaign_uid = s.campaign_uid AND l.uid = s.layer_uid
    WHERE f.is_current AND f.status = 'ok'
      AND ($1::text IS NULL OR l.texture_class = $1::text)
      AND ($2::text IS NULL OR lower(l.horizon) = lower($2::text))
      AND ($3::float8 IS NULL OR (l.top_cm < $4::float8 AND l.bottom_cm > $3::float8))
      AND ($5::text IS NULL OR f.model = $5::text)
), quantities AS (
    SELECT c.campaign_uid, c.model, 0 AS kind, p.key AS quantity, p.value::float8 AS v
    FROM chosen c, jsonb_each_text(c.parameters::jsonb) p
    WHERE p.value ~ '^-?[0-9.]+([eE][-+]?[0-9]+)?$'
    UNION ALL
    SELECT c.campaign_uid, c.model, 1, d.quantity, d.v
    FROM chosen c,
         LATERAL (VALUES ('theta_fc', c.theta_fc), ('theta_pwp', c.theta_pwp),
                         ('available_water', c.available_water)) AS d (quantity, v)
    WHERE d.v IS NOT NULL
)
SELECT model, quantity, count(*)::bigint, count(DISTINCT campaign_uid)::bigint,
       min(v), percentile_cont(0.25) WITHIN GROUP (ORDER BY v),
       percentile_cont(0.5) WITHIN GROUP (ORDER BY v),
       percentile_cont(0.75) WITHIN GROUP (ORDER BY v), max(v), avg(v)
FROM quantities
GROUP BY model, kind, quantity
ORDER BY model, kind, quantity";

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn depth_ranges_parse_and_bad_ones_are_refused() {
        assert_eq!(parse_depth("0-30").ok(), Some((0.0, 30.0)));
        assert_eq!(parse_depth(" 12.5 - 40 ").ok(), Some((12.5, 40.0)));
        for bad in ["30-0", "abc", "10", "5-5", "-5-10"] {
            assert!(parse_depth(bad).is_err(), "{bad}");
        }
    }
}
