-- porewise schema, version 2: campaign fits with their full report, failed attempts, and a
-- cheap way to tell a fit is stale.
--
-- Every change to a sample's readings, or to a flag on one of them, bumps the sample's
-- readings_rev (triggers below). A fit records the revision it saw: while the two agree the
-- fit is up to date without reading a single reading; when they differ, the fingerprint
-- (SHA-256 of the readings used) decides.

ALTER TABLE sample ADD COLUMN readings_rev INTEGER NOT NULL DEFAULT 0;

-- 'ok' fits carry parameters; a 'failed' attempt keeps its reason (and a report when the
-- solver got as far as one) and never becomes current.
ALTER TABLE fit ADD COLUMN status TEXT NOT NULL DEFAULT 'ok' CHECK (status IN ('ok', 'failed'));
ALTER TABLE fit ADD COLUMN message TEXT;
-- The model asked for: a model identifier or 'auto'.
ALTER TABLE fit ADD COLUMN requested TEXT;
-- Parameters the user fixed: {name: value}.
ALTER TABLE fit ADD COLUMN fixed TEXT CHECK (fixed IS NULL OR json_valid(fixed));
-- The whole fit report (estimates, statistics, per-reading diagnostics) as JSON.
ALTER TABLE fit ADD COLUMN report TEXT CHECK (report IS NULL OR json_valid(report));
-- With 'auto': every ranked model (AICc, Akaike weight, parameters) and the skipped ones.
ALTER TABLE fit ADD COLUMN ranking TEXT CHECK (ranking IS NULL OR json_valid(ranking));
-- Ids of the readings used, in the order of the report's per-reading diagnostics.
ALTER TABLE fit ADD COLUMN reading_ids TEXT CHECK (reading_ids IS NULL OR json_valid(reading_ids));
-- The sample's readings_rev when the fit was made.
ALTER TABLE fit ADD COLUMN sample_rev INTEGER;

CREATE INDEX fit_sample_created ON fit (sample_id, created_at);

CREATE TRIGGER reading_insert_bumps_rev AFTER INSERT ON reading BEGIN
    UPDATE sample SET readings_rev = readings_rev + 1 WHERE id = NEW.sample_id;
END;
CREATE TRIGGER reading_update_bumps_rev AFTER UPDATE ON reading BEGIN
    UPDATE sample SET readings_rev = readings_rev + 1 WHERE id IN (OLD.sample_id, NEW.sample_id);
END;
CREATE TRIGGER reading_delete_bumps_rev AFTER DELETE ON reading BEGIN
    UPDATE sample SET readings_rev = readings_rev + 1 WHERE id = OLD.sample_id;
END;
CREATE TRIGGER flag_insert_bumps_rev AFTER INSERT ON flag WHEN NEW.reading_id IS NOT NULL BEGIN
    UPDATE sample SET readings_rev = readings_rev + 1
    WHERE id = (SELECT sample_id FROM reading WHERE id = NEW.reading_id);
END;
CREATE TRIGGER flag_update_bumps_rev AFTER UPDATE OF status ON flag
WHEN NEW.reading_id IS NOT NULL AND NEW.status <> OLD.status BEGIN
    UPDATE sample SET readings_rev = readings_rev + 1
    WHERE id = (SELECT sample_id FROM reading WHERE id = NEW.reading_id);
END;
