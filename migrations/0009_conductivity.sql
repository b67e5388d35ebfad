-- porewise schema: measured hydraulic conductivity.
--
-- Labs measure unsaturated conductivity (evaporation experiments, multistep outflow, tension
-- infiltrometers) as K at a suction, K(h), or at a water content, K(theta), and the saturated
-- conductivity Ks per core (falling or constant head). This step adds:
--
-- * `conductivity_reading`: one measured K per row, in cm/day, at a suction h (cm) or at a
--   water content theta (m3/m3), never both, with the file and line it came from;
-- * `sample.ks_cm_per_day`: a core's measured Ks (layers already have `ks_cm_per_day`), and
--   `sample.ks_batch_id`, the import that gave it;
-- * the import kind `conductivity`: `import_batch` is rebuilt to widen its CHECK (SQLite cannot
--   change one in place), keeping every row, id and index. A later step that widens the same
--   CHECK again must keep every kind listed here.

CREATE TABLE import_batch_v9 (
    id INTEGER PRIMARY KEY,
    file_name TEXT NOT NULL,
    sha256 TEXT NOT NULL CHECK (length(sha256) = 64),
    kind TEXT NOT NULL CHECK (kind IN ('sites', 'layers', 'lab', 'logger', 'conductivity')),
    rows INTEGER NOT NULL CHECK (rows >= 0),
    forced INTEGER NOT NULL DEFAULT 0 CHECK (forced IN (0, 1)),
    imported_at TEXT NOT NULL CHECK (julianday(imported_at) IS NOT NULL)
) STRICT;

INSERT INTO import_batch_v9 (id, file_name, sha256, kind, rows, forced, imported_at)
    SELECT id, file_name, sha256, kind, rows, forced, imported_at FROM import_batch;

DROP TABLE import_batch;
-- The tables that refer to `import_batch` keep their references as they are.
PRAGMA legacy_alter_table = ON;
ALTER TABLE import_batch_v9 RENAME TO import_batch;
PRAGMA legacy_alter_table = OFF;
CREATE INDEX import_batch_sha256 ON import_batch (sha256);

ALTER TABLE sample ADD COLUMN ks_cm_per_day REAL
    CHECK (ks_cm_per_day IS NULL OR (ks_cm_per_day > 0 AND ks_cm_per_day < 1e9));
ALTER TABLE sample ADD COLUMN ks_batch_id INTEGER REFERENCES import_batch (id);

CREATE TABLE conductivity_reading (
    id INTEGER PRIMARY KEY,
    uid TEXT NOT NULL UNIQUE CHECK (length(uid) = 36),
    sample_id INTEGER NOT NULL REFERENCES sample (id),
    h_cm REAL CHECK (h_cm IS NULL OR h_cm BETWEEN 0 AND 10197163),   -- 10^6 kPa: oven dry
    theta REAL CHECK (theta IS NULL OR theta BETWEEN 0 AND 1),
    k_cm_per_day REAL NOT NULL CHECK (k_cm_per_day > 0 AND k_cm_per_day < 1e9),
    method TEXT,
    measured_at TEXT CHECK (measured_at IS NULL OR julianday(measured_at) IS NOT NULL),
    notes TEXT,
    batch_id INTEGER REFERENCES import_batch (id),
    source_line INTEGER CHECK (source_line >= 1),
    CHECK ((h_cm IS NULL) <> (theta IS NULL))
) STRICT;
CREATE INDEX conductivity_reading_sample ON conductivity_reading (sample_id, h_cm, theta);
CREATE INDEX conductivity_reading_batch ON conductivity_reading (batch_id);

-- A fit made with the sample's measured conductivity (`porewise fit --with-conductivity`):
-- the whole joint report (Ks, L, the covariance of every parameter, the statistics of each
-- data set and jointly, the weighting) and the conductivity readings used, as JSON. The row's
-- own parameters, standard errors, covariance and report are those of the retention
-- parameters, so everything that reads retention fits reads a joint fit too.
ALTER TABLE fit ADD COLUMN joint TEXT CHECK (joint IS NULL OR json_valid(joint));
