-- porewise schema, version 1: the whole campaign data model.
--
-- Canonical units: suction head h in cm of water (positive when drier), water content theta in
-- m3/m3, depths in cm below the surface, times as ISO 8601 text in UTC.
-- Integer ids are local to one file; the uid columns (UUID v4) stay stable when two campaign
-- files are merged. Append-only: later changes go in 0002_*.sql and on, never here.

PRAGMA application_id = 1347375703; -- 'PORW'

-- The campaign itself: exactly one row.
CREATE TABLE campaign (
    id INTEGER PRIMARY KEY CHECK (id = 1),
    name TEXT NOT NULL CHECK (length(name) > 0),
    description TEXT,
    fc_kpa REAL NOT NULL CHECK (fc_kpa > 0),
    pwp_kpa REAL NOT NULL CHECK (pwp_kpa > fc_kpa),
    created_at TEXT NOT NULL CHECK (julianday(created_at) IS NOT NULL)
) STRICT;

-- One imported file: provenance, and the refusal of a second import of the same content.
CREATE TABLE import_batch (
    id INTEGER PRIMARY KEY,
    file_name TEXT NOT NULL,
    sha256 TEXT NOT NULL CHECK (length(sha256) = 64),
    kind TEXT NOT NULL CHECK (kind IN ('sites', 'layers', 'lab', 'logger')),
    rows INTEGER NOT NULL CHECK (rows >= 0),
    forced INTEGER NOT NULL DEFAULT 0 CHECK (forced IN (0, 1)),
    imported_at TEXT NOT NULL CHECK (julianday(imported_at) IS NOT NULL)
) STRICT;
CREATE INDEX import_batch_sha256 ON import_batch (sha256);

CREATE TABLE site (
    id INTEGER PRIMARY KEY,
    uid TEXT NOT NULL UNIQUE CHECK (length(uid) = 36),
    code TEXT NOT NULL UNIQUE CHECK (length(code) > 0),
    name TEXT,
    latitude REAL CHECK (latitude BETWEEN -90 AND 90),    -- WGS 84, decimal degrees
    longitude REAL CHECK (longitude BETWEEN -180 AND 180),
    elevation_m REAL CHECK (elevation_m BETWEEN -500 AND 9000),
    notes TEXT,
    batch_id INTEGER REFERENCES import_batch (id)         -- the import that created it
) STRICT;

CREATE TABLE layer (
    id INTEGER PRIMARY KEY,
    uid TEXT NOT NULL UNIQUE CHECK (length(uid) = 36),
    site_id INTEGER NOT NULL REFERENCES site (id),
    top_cm REAL NOT NULL CHECK (top_cm >= 0),
    bottom_cm REAL NOT NULL CHECK (bottom_cm > top_cm),
    horizon TEXT,
    sand_pct REAL CHECK (sand_pct BETWEEN 0 AND 100),
    silt_pct REAL CHECK (silt_pct BETWEEN 0 AND 100),
    clay_pct REAL CHECK (clay_pct BETWEEN 0 AND 100),
    organic_carbon_pct REAL CHECK (organic_carbon_pct BETWEEN 0 AND 100),
    bulk_density_g_cm3 REAL CHECK (bulk_density_g_cm3 BETWEEN 0.05 AND 2.65),
    ks_cm_per_day REAL CHECK (ks_cm_per_day > 0),
    batch_id INTEGER REFERENCES import_batch (id),
    UNIQUE (site_id, top_cm, bottom_cm),
    CHECK (sand_pct IS NULL OR silt_pct IS NULL OR clay_pct IS NULL
           OR abs(sand_pct + silt_pct + clay_pct - 100) <= 2)
) STRICT;

CREATE TABLE sample (
    id INTEGER PRIMARY KEY,
    uid TEXT NOT NULL UNIQUE CHECK (length(uid) = 36),
    layer_id INTEGER NOT NULL REFERENCES layer (id),
    code TEXT NOT NULL UNIQUE CHECK (length(code) > 0),
    kind TEXT NOT NULL CHECK (kind IN ('lab_core', 'field_pairing')),
    collected_on TEXT CHECK (collected_on IS NULL OR date(collected_on) = collected_on),
    bulk_density_g_cm3 REAL CHECK (bulk_density_g_cm3 BETWEEN 0.05 AND 2.65),
    notes TEXT,
    batch_id INTEGER REFERENCES import_batch (id)
) STRICT;
CREATE INDEX sample_layer ON sample (layer_id);

-- A retention measurement: a suction and the water content held at it.
CREATE TABLE reading (
    id INTEGER PRIMARY KEY,
    uid TEXT NOT NULL UNIQUE CHECK (length(uid) = 36),
    sample_id INTEGER NOT NULL REFERENCES sample (id),
    h_cm REAL NOT NULL CHECK (h_cm BETWEEN 0 AND 1e7),   -- pF 7 is oven dry
    theta REAL NOT NULL CHECK (theta BETWEEN 0 AND 1),
    method TEXT,
    measured_at TEXT CHECK (measured_at IS NULL OR julianday(measured_at) IS NOT NULL),
    branch TEXT NOT NULL DEFAULT 'unknown' CHECK (branch IN ('drying', 'wetting', 'unknown')),
    weight REAL CHECK (weight > 0),
    notes TEXT,
    batch_id INTEGER REFERENCES import_batch (id),
    source_line INTEGER CHECK (source_line >= 1)
) STRICT;
CREATE INDEX reading_sample_suction ON reading (sample_id, h_cm);
CREATE INDEX reading_batch ON reading (batch_id);

-- A field logger value: tensiometer suction (h, cm, 0 or more) or sensor water content
-- (theta, m3/m3). A sensor is (site, sensor_id), with one depth and one kind. No uid column:
-- the key (site uid, sensor_id, time) is already stable across campaign files, and a random
-- per-record index would cost a bulk import of millions of records dearly. Reads go through
-- the key's index, sensor by sensor, in time order.
CREATE TABLE logger_record (
    id INTEGER PRIMARY KEY,
    site_id INTEGER NOT NULL REFERENCES site (id),
    depth_cm REAL NOT NULL CHECK (depth_cm >= 0),
    sensor TEXT NOT NULL CHECK (sensor IN ('tensiometer', 'water_content')),
    sensor_id TEXT NOT NULL CHECK (length(sensor_id) > 0),
    time TEXT NOT NULL CHECK (julianday(time) IS NOT NULL),  -- UTC, YYYY-MM-DDTHH:MM:SSZ
    value REAL NOT NULL,
    batch_id INTEGER REFERENCES import_batch (id),
    source_line INTEGER CHECK (source_line >= 1),
    UNIQUE (site_id, sensor_id, time),
    CHECK (sensor <> 'water_content' OR value BETWEEN 0 AND 1),
    CHECK (sensor <> 'tensiometer' OR value BETWEEN 0 AND 1e7)
) STRICT;

-- A mark on a reading or a logger record, with its review trail. Never deleted.
CREATE TABLE flag (
    id INTEGER PRIMARY KEY,
    reading_id INTEGER REFERENCES reading (id),
    logger_record_id INTEGER REFERENCES logger_record (id),
    reason TEXT NOT NULL CHECK (length(reason) > 0),
    score REAL,
    origin TEXT NOT NULL CHECK (origin IN ('auto', 'manual')),
    status TEXT NOT NULL CHECK (status IN ('suggested', 'accepted', 'dismissed', 'cleared')),
    note TEXT,
    created_at TEXT NOT NULL CHECK (julianday(created_at) IS NOT NULL),
    decided_at TEXT CHECK (decided_at IS NULL OR julianday(decided_at) IS NOT NULL),
    CHECK ((reading_id IS NULL) <> (logger_record_id IS NULL)),
    CHECK (status = 'suggested' OR decided_at IS NOT NULL)
) STRICT;
CREATE INDEX flag_reading ON flag (reading_id) WHERE reading_id IS NOT NULL;
CREATE INDEX flag_logger_record ON flag (logger_record_id) WHERE logger_record_id IS NOT NULL;
CREATE INDEX flag_status ON flag (status);

-- A fitted retention curve. A fit whose fingerprint no longer matches the sample's readings
-- is stale. At most one current fit per sample.
CREATE TABLE fit (
    id INTEGER PRIMARY KEY,
    sample_id INTEGER NOT NULL REFERENCES sample (id),
    model TEXT NOT NULL CHECK (length(model) > 0),
    parameters TEXT NOT NULL CHECK (json_valid(parameters)),            -- {name: value}
    standard_errors TEXT CHECK (standard_errors IS NULL OR json_valid(standard_errors)),
    covariance TEXT CHECK (covariance IS NULL OR json_valid(covariance)), -- row-major matrix
    statistics TEXT NOT NULL CHECK (json_valid(statistics)),            -- sse, rmse, r2, aicc, ...
    n_points INTEGER NOT NULL CHECK (n_points >= 0),
    readings_fingerprint TEXT NOT NULL,
    created_at TEXT NOT NULL CHECK (julianday(created_at) IS NOT NULL),
    is_current INTEGER NOT NULL DEFAULT 0 CHECK (is_current IN (0, 1))
) STRICT;
CREATE INDEX fit_sample ON fit (sample_id, model);
CREATE UNIQUE INDEX fit_current ON fit (sample_id) WHERE is_current = 1;
