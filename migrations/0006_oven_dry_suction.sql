-- porewise schema, version 6: readings up to the oven-dry suction.
--
-- Soil is oven dry at a suction of 10^6 kPa = 10 197 162.13 cm (pF 7.01), the dry end of the
-- Fredlund & Xing (1994) curve. Version 1 stopped readings at 1e7 cm, so that point could not
-- be stored. SQLite cannot change a CHECK constraint in place, so the table is rebuilt with
-- the same columns, rows, ids, indexes and triggers (the copy fires no trigger: no sample's
-- readings_rev moves, no fit turns stale). The bound here is 10^6 kPa rounded up to the next
-- cm; the import checks the exact value. Foreign keys are off while migrations run (see
-- src/store/migrate.rs) and checked before the commit.

CREATE TABLE reading_v6 (
    id INTEGER PRIMARY KEY,
    uid TEXT NOT NULL UNIQUE CHECK (length(uid) = 36),
    sample_id INTEGER NOT NULL REFERENCES sample (id),
    h_cm REAL NOT NULL CHECK (h_cm BETWEEN 0 AND 10197163),   -- 10^6 kPa: oven dry
    theta REAL NOT NULL CHECK (theta BETWEEN 0 AND 1),
    method TEXT,
    measured_at TEXT CHECK (measured_at IS NULL OR julianday(measured_at) IS NOT NULL),
    branch TEXT NOT NULL DEFAULT 'unknown' CHECK (branch IN ('drying', 'wetting', 'unknown')),
    weight REAL CHECK (weight > 0),
    notes TEXT,
    batch_id INTEGER REFERENCES import_batch (id),
    source_line INTEGER CHECK (source_line >= 1)
) STRICT;

INSERT INTO reading_v6 (id, uid, sample_id, h_cm, theta, method, measured_at, branch, weight,
                        notes, batch_id, source_line)
    SELECT id, uid, sample_id, h_cm, theta, method, measured_at, branch, weight, notes,
           batch_id, source_line
    FROM reading;

DROP TABLE reading;
-- Keep the triggers on `flag` that name `reading` as they are while the new table takes the name.
PRAGMA legacy_alter_table = ON;
ALTER TABLE reading_v6 RENAME TO reading;
PRAGMA legacy_alter_table = OFF;

CREATE INDEX reading_sample_suction ON reading (sample_id, h_cm);
CREATE INDEX reading_batch ON reading (batch_id);

CREATE TRIGGER reading_insert_bumps_rev AFTER INSERT ON reading BEGIN
    UPDATE sample SET readings_rev = readings_rev + 1 WHERE id = NEW.sample_id;
END;
CREATE TRIGGER reading_update_bumps_rev AFTER UPDATE ON reading BEGIN
    UPDATE sample SET readings_rev = readings_rev + 1 WHERE id IN (OLD.sample_id, NEW.sample_id);
END;
CREATE TRIGGER reading_delete_bumps_rev AFTER DELETE ON reading BEGIN
    UPDATE sample SET readings_rev = readings_rev + 1 WHERE id = OLD.sample_id;
END;
