-- porewise schema, version 7: measuring days an older porewise accepted but cannot read back.
--
-- Before version 7 a lab file's measured_on was read leniently: `-1-01-01` was stored as
-- `-0001-01-01` (which then stopped listings, reviews and exports of the whole campaign), and
-- `26-6-3` or `0-1-1` as days of the first centuries. Imports now take ISO 8601 calendar
-- dates only, YYYY-MM-DD with a year from 1800 to 2200. Here every stored day outside that
-- form is moved into the reading's notes (`measured_on as imported: ...`, nothing is lost)
-- and the day left empty. The readings' values are untouched, so fits stay current.

UPDATE reading
SET notes = CASE WHEN notes IS NULL OR notes = '' THEN '' ELSE notes || '; ' END
            || 'measured_on as imported: ' || measured_at,
    measured_at = NULL
WHERE measured_at IS NOT NULL
  AND NOT (measured_at GLOB '[0-9][0-9][0-9][0-9]-[0-9][0-9]-[0-9][0-9]'
           AND date(measured_at) IS measured_at
           AND CAST(substr(measured_at, 1, 4) AS INTEGER) BETWEEN 1800 AND 2200);
