-- porewise schema, version 11: logger sensors in a table of their own, logger records compact.
--
-- A sensor (a site and a sensor id) has one depth and one kind: the importer has always
-- refused a row that gives a sensor another, so both move to `logger_sensor`. A record keeps
-- its id (flags name records by it), a reference to its sensor, its time as whole seconds since
-- 1970-01-01T00:00:00Z (every porewise writer stored `YYYY-MM-DDTHH:MM:SSZ`, which this is
-- exactly), its value, import batch and source line. That makes a record about 30 bytes and
-- its key (sensor, time) two integers, so a bulk import costs SQLite far less per record, and
-- a sensor's series is one range of that key in time order.
--
-- `logger_view` shows records with the columns of versions 1-10 (site, depth, kind, sensor id,
-- the time as `YYYY-MM-DDTHH:MM:SSZ` text) plus `time_s`, for reading.
--
-- A merge of two campaigns (porewise merge, archive pull) could give one sensor records at two
-- depths or of two kinds. Such a record keeps what it had in `depth_cm` / `sensor`, which are
-- NULL (the sensor's) on every other record; the sensor takes the depth and kind of its latest
-- record, as the importer did when it checked new rows against a stored sensor.
--
-- The foreign keys of a record are checked at commit (DEFERRABLE INITIALLY DEFERRED), so an
-- import can insert many records in one statement without SQLite keeping a statement journal.
-- Checks that need text or calendar arithmetic (the time's form, water content up to 1) are
-- made by porewise before it writes; the table keeps the integer and range checks.
--
-- Ids, rows, flags and their references stay as they were; no trigger or index other than the
-- key's was on the old table. A time that was not in the stored form (only possible in a file
-- edited outside porewise) becomes the instant SQLite reads in it, to the whole second.

CREATE TABLE logger_sensor (
    id INTEGER PRIMARY KEY,
    site_id INTEGER NOT NULL REFERENCES site (id),
    sensor_id TEXT NOT NULL CHECK (length(sensor_id) > 0),
    depth_cm REAL NOT NULL CHECK (depth_cm >= 0),
    sensor TEXT NOT NULL CHECK (sensor IN ('tensiometer', 'water_content')),
    UNIQUE (site_id, sensor_id)
) STRICT;

INSERT INTO logger_sensor (site_id, sensor_id, depth_cm, sensor)
    SELECT k.site_id, k.sensor_id,
           (SELECT r.depth_cm FROM logger_record r
            WHERE r.site_id = k.site_id AND r.sensor_id = k.sensor_id
            ORDER BY r.time DESC LIMIT 1),
           (SELECT r.sensor FROM logger_record r
            WHERE r.site_id = k.site_id AND r.sensor_id = k.sensor_id
            ORDER BY r.time DESC LIMIT 1)
    FROM (SELECT DISTINCT site_id, sensor_id FROM logger_record) k
    ORDER BY k.site_id, k.sensor_id;

CREATE TABLE logger_record_v11 (
    id INTEGER PRIMARY KEY,
    logger_sensor_id INTEGER NOT NULL
        REFERENCES logger_sensor (id) DEFERRABLE INITIALLY DEFERRED,
    -- UTC, whole seconds since 1970; the years 0000 to 9999 (`YYYY-MM-DDTHH:MM:SSZ`).
    time_s INTEGER NOT NULL CHECK (time_s BETWEEN -62167219200 AND 253402300799),
    -- Suction head (cm, at most pF 7) or water content (m3/m3, at most 1).
    value REAL NOT NULL CHECK (value BETWEEN 0 AND 1e7),
    batch_id INTEGER REFERENCES import_batch (id) DEFERRABLE INITIALLY DEFERRED,
    source_line INTEGER CHECK (source_line >= 1),
    -- NULL: the sensor's. Set only where a merge left this record another depth or kind.
    depth_cm REAL CHECK (depth_cm IS NULL OR depth_cm >= 0),
    sensor TEXT CHECK (sensor IS NULL OR sensor IN ('tensiometer', 'water_content')),
    UNIQUE (logger_sensor_id, time_s),
    CHECK (sensor IS NOT 'water_content' OR value <= 1)
) STRICT;

INSERT INTO logger_record_v11 (id, logger_sensor_id, time_s, value, batch_id, source_line,
                               depth_cm, sensor)
    SELECT r.id, s.id, unixepoch(r.time), r.value, r.batch_id, r.source_line,
           nullif(r.depth_cm, s.depth_cm), nullif(r.sensor, s.sensor)
    FROM logger_record r
    JOIN logger_sensor s ON s.site_id = r.site_id AND s.sensor_id = r.sensor_id
    ORDER BY r.id;

DROP TABLE logger_record;
PRAGMA legacy_alter_table = ON;
ALTER TABLE logger_record_v11 RENAME TO logger_record;
PRAGMA legacy_alter_table = OFF;

CREATE VIEW logger_view AS
    SELECT r.id, s.site_id, coalesce(r.depth_cm, s.depth_cm) AS depth_cm,
           coalesce(r.sensor, s.sensor) AS sensor, s.sensor_id,
           strftime('%Y-%m-%dT%H:%M:%SZ', r.time_s, 'unixepoch') AS time, r.value, r.batch_id,
           r.source_line, r.time_s, r.logger_sensor_id
    FROM logger_record r JOIN logger_sensor s ON s.id = r.logger_sensor_id;
