-- porewise schema, version 10: a stable unique id on every row a team shares, and flags on
-- measured conductivity readings.
--
-- Sites, layers, samples, readings and conductivity readings have carried a uid since they
-- were made. Merging campaign files and the shared archive also need one on the campaign,
-- import batches, fits, flags and flag events (logger records are matched by their natural
-- key: site uid, sensor id and time). Each of those tables is rebuilt with a `uid` column
-- whose default is a fresh random (version 4) UUID, so every insert that names no uid gets
-- one and existing rows get theirs during the copy. Ids, rows, indexes and triggers stay as
-- they were; the copy fires no trigger (no sample's readings_rev moves, no fit turns stale).
--
-- A flag now names exactly one of a lab reading, a logger record or a conductivity reading.
-- Foreign keys are off while migrations run (see src/store/migrate.rs) and checked before the
-- commit.

-- The campaign -------------------------------------------------------------------------------

CREATE TABLE campaign_v10 (
    id INTEGER PRIMARY KEY CHECK (id = 1),
    uid TEXT NOT NULL UNIQUE CHECK (length(uid) = 36) DEFAULT (
        lower(hex(randomblob(4))) || '-' || lower(hex(randomblob(2))) || '-4'
        || substr(lower(hex(randomblob(2))), 2) || '-'
        || substr('89ab', 1 + (abs(random()) % 4), 1) || substr(lower(hex(randomblob(2))), 2)
        || '-' || lower(hex(randomblob(6)))),
    name TEXT NOT NULL CHECK (length(name) > 0),
    description TEXT,
    fc_kpa REAL NOT NULL CHECK (fc_kpa > 0),
    pwp_kpa REAL NOT NULL CHECK (pwp_kpa > fc_kpa),
    created_at TEXT NOT NULL CHECK (julianday(created_at) IS NOT NULL),
    texture_prior_max_readings INTEGER
        CHECK (texture_prior_max_readings IS NULL OR texture_prior_max_readings BETWEEN 0 AND 1000)
) STRICT;
INSERT INTO campaign_v10 (id, name, description, fc_kpa, pwp_kpa, created_at,
                          texture_prior_max_readings)
    SELECT id, name, description, fc_kpa, pwp_kpa, created_at, texture_prior_max_readings
    FROM campaign;
DROP TABLE campaign;
PRAGMA legacy_alter_table = ON;
ALTER TABLE campaign_v10 RENAME TO campaign;
PRAGMA legacy_alter_table = OFF;

-- Import batches -----------------------------------------------------------------------------

CREATE TABLE import_batch_v10 (
    id INTEGER PRIMARY KEY,
    uid TEXT NOT NULL UNIQUE CHECK (length(uid) = 36) DEFAULT (
        lower(hex(randomblob(4))) || '-' || lower(hex(randomblob(2))) || '-4'
        || substr(lower(hex(randomblob(2))), 2) || '-'
        || substr('89ab', 1 + (abs(random()) % 4), 1) || substr(lower(hex(randomblob(2))), 2)
        || '-' || lower(hex(randomblob(6)))),
    file_name TEXT NOT NULL,
    sha256 TEXT NOT NULL CHECK (length(sha256) = 64),
    kind TEXT NOT NULL CHECK (kind IN ('sites', 'layers', 'lab', 'logger', 'conductivity')),
    rows INTEGER NOT NULL CHECK (rows >= 0),
    forced INTEGER NOT NULL DEFAULT 0 CHECK (forced IN (0, 1)),
    imported_at TEXT NOT NULL CHECK (julianday(imported_at) IS NOT NULL)
) STRICT;
INSERT INTO import_batch_v10 (id, file_name, sha256, kind, rows, forced, imported_at)
    SELECT id, file_name, sha256, kind, rows, forced, imported_at FROM import_batch;
DROP TABLE import_batch;
PRAGMA legacy_alter_table = ON;
ALTER TABLE import_batch_v10 RENAME TO import_batch;
PRAGMA legacy_alter_table = OFF;
CREATE INDEX import_batch_sha256 ON import_batch (sha256);

-- Fits ---------------------------------------------------------------------------------------

CREATE TABLE fit_v10 (
    id INTEGER PRIMARY KEY,
    uid TEXT NOT NULL UNIQUE CHECK (length(uid) = 36) DEFAULT (
        lower(hex(randomblob(4))) || '-' || lower(hex(randomblob(2))) || '-4'
        || substr(lower(hex(randomblob(2))), 2) || '-'
        || substr('89ab', 1 + (abs(random()) % 4), 1) || substr(lower(hex(randomblob(2))), 2)
        || '-' || lower(hex(randomblob(6)))),
    sample_id INTEGER NOT NULL REFERENCES sample (id),
    model TEXT NOT NULL CHECK (length(model) > 0),
    parameters TEXT NOT NULL CHECK (json_valid(parameters)),            -- {name: value}
    standard_errors TEXT CHECK (standard_errors IS NULL OR json_valid(standard_errors)),
    covariance TEXT CHECK (covariance IS NULL OR json_valid(covariance)), -- row-major matrix
    statistics TEXT NOT NULL CHECK (json_valid(statistics)),            -- sse, rmse, r2, aicc, ...
    n_points INTEGER NOT NULL CHECK (n_points >= 0),
    readings_fingerprint TEXT NOT NULL,
    created_at TEXT NOT NULL CHECK (julianday(created_at) IS NOT NULL),
    is_current INTEGER NOT NULL DEFAULT 0 CHECK (is_current IN (0, 1)),
    status TEXT NOT NULL DEFAULT 'ok' CHECK (status IN ('ok', 'failed')),
    message TEXT,
    requested TEXT,
    fixed TEXT CHECK (fixed IS NULL OR json_valid(fixed)),
    report TEXT CHECK (report IS NULL OR json_valid(report)),
    ranking TEXT CHECK (ranking IS NULL OR json_valid(ranking)),
    reading_ids TEXT CHECK (reading_ids IS NULL OR json_valid(reading_ids)),
    sample_rev INTEGER,
    conductivity TEXT CHECK (conductivity IS NULL OR conductivity IN ('mualem', 'burdine')),
    joint TEXT CHECK (joint IS NULL OR json_valid(joint))
) STRICT;
INSERT INTO fit_v10 (id, sample_id, model, parameters, standard_errors, covariance, statistics,
                     n_points, readings_fingerprint, created_at, is_current, status, message,
                     requested, fixed, report, ranking, reading_ids, sample_rev, conductivity,
                     joint)
    SELECT id, sample_id, model, parameters, standard_errors, covariance, statistics, n_points,
           readings_fingerprint, created_at, is_current, status, message, requested, fixed,
           report, ranking, reading_ids, sample_rev, conductivity, joint
    FROM fit;
DROP TABLE fit;
PRAGMA legacy_alter_table = ON;
ALTER TABLE fit_v10 RENAME TO fit;
PRAGMA legacy_alter_table = OFF;
CREATE INDEX fit_sample ON fit (sample_id, model);
CREATE UNIQUE INDEX fit_current ON fit (sample_id) WHERE is_current = 1;
CREATE INDEX fit_sample_created ON fit (sample_id, created_at);
CREATE INDEX fit_current_summary
    ON fit (is_current, sample_id, id, model, readings_fingerprint, sample_rev);
CREATE INDEX fit_failed_summary ON fit (status, id, sample_id, message);

-- Flags and their audit trail ----------------------------------------------------------------

CREATE TABLE flag_v10 (
    id INTEGER PRIMARY KEY,
    uid TEXT NOT NULL UNIQUE CHECK (length(uid) = 36) DEFAULT (
        lower(hex(randomblob(4))) || '-' || lower(hex(randomblob(2))) || '-4'
        || substr(lower(hex(randomblob(2))), 2) || '-'
        || substr('89ab', 1 + (abs(random()) % 4), 1) || substr(lower(hex(randomblob(2))), 2)
        || '-' || lower(hex(randomblob(6)))),
    reading_id INTEGER REFERENCES reading (id),
    logger_record_id INTEGER REFERENCES logger_record (id),
    conductivity_reading_id INTEGER REFERENCES conductivity_reading (id),
    reason TEXT NOT NULL CHECK (length(reason) > 0),
    score REAL,
    origin TEXT NOT NULL CHECK (origin IN ('auto', 'manual')),
    status TEXT NOT NULL CHECK (status IN ('suggested', 'accepted', 'dismissed', 'cleared')),
    note TEXT,
    created_at TEXT NOT NULL CHECK (julianday(created_at) IS NOT NULL),
    decided_at TEXT CHECK (decided_at IS NULL OR julianday(decided_at) IS NOT NULL),
    rule TEXT CHECK (rule IS NULL OR length(rule) > 0),
    decided_by TEXT CHECK (decided_by IS NULL OR decided_by IN ('user', 'checks')),
    CHECK ((reading_id IS NOT NULL) + (logger_record_id IS NOT NULL)
           + (conductivity_reading_id IS NOT NULL) = 1),
    CHECK (status = 'suggested' OR decided_at IS NOT NULL)
) STRICT;
INSERT INTO flag_v10 (id, reading_id, logger_record_id, reason, score, origin, status, note,
                      created_at, decided_at, rule, decided_by)
    SELECT id, reading_id, logger_record_id, reason, score, origin, status, note, created_at,
           decided_at, rule, decided_by
    FROM flag;

CREATE TABLE flag_event_v10 (
    id INTEGER PRIMARY KEY,
    uid TEXT NOT NULL UNIQUE CHECK (length(uid) = 36) DEFAULT (
        lower(hex(randomblob(4))) || '-' || lower(hex(randomblob(2))) || '-4'
        || substr(lower(hex(randomblob(2))), 2) || '-'
        || substr('89ab', 1 + (abs(random()) % 4), 1) || substr(lower(hex(randomblob(2))), 2)
        || '-' || lower(hex(randomblob(6)))),
    flag_id INTEGER NOT NULL REFERENCES flag (id),
    from_status TEXT CHECK (from_status IS NULL
        OR from_status IN ('suggested', 'accepted', 'dismissed', 'cleared')),
    to_status TEXT NOT NULL CHECK (to_status IN ('suggested', 'accepted', 'dismissed', 'cleared')),
    actor TEXT NOT NULL CHECK (actor IN ('user', 'checks')),
    note TEXT,
    at TEXT NOT NULL CHECK (julianday(at) IS NOT NULL)
) STRICT;
-- The audit trail's own triggers forbid changing it; the copy only inserts.
INSERT INTO flag_event_v10 (id, flag_id, from_status, to_status, actor, note, at)
    SELECT id, flag_id, from_status, to_status, actor, note, at FROM flag_event;

DROP TABLE flag_event;
DROP TABLE flag;
PRAGMA legacy_alter_table = ON;
ALTER TABLE flag_v10 RENAME TO flag;
ALTER TABLE flag_event_v10 RENAME TO flag_event;
PRAGMA legacy_alter_table = OFF;

CREATE INDEX flag_reading ON flag (reading_id) WHERE reading_id IS NOT NULL;
CREATE INDEX flag_logger_record ON flag (logger_record_id) WHERE logger_record_id IS NOT NULL;
CREATE INDEX flag_conductivity_reading ON flag (conductivity_reading_id)
    WHERE conductivity_reading_id IS NOT NULL;
CREATE INDEX flag_status ON flag (status);
CREATE INDEX flag_reading_rule ON flag (reading_id, rule) WHERE reading_id IS NOT NULL;
CREATE INDEX flag_event_flag ON flag_event (flag_id, id);

CREATE TRIGGER flag_insert_logs_event AFTER INSERT ON flag BEGIN
    INSERT INTO flag_event (flag_id, from_status, to_status, actor, note, at)
    VALUES (NEW.id, NULL, NEW.status,
            coalesce(NEW.decided_by, CASE NEW.origin WHEN 'manual' THEN 'user' ELSE 'checks' END),
            NEW.note, coalesce(NEW.decided_at, NEW.created_at));
END;
CREATE TRIGGER flag_status_logs_event AFTER UPDATE OF status ON flag
WHEN NEW.status <> OLD.status BEGIN
    INSERT INTO flag_event (flag_id, from_status, to_status, actor, note, at)
    VALUES (NEW.id, OLD.status, NEW.status, coalesce(NEW.decided_by, 'user'), NEW.note,
            coalesce(NEW.decided_at, strftime('%Y-%m-%dT%H:%M:%SZ', 'now')));
END;
CREATE TRIGGER flag_is_never_deleted BEFORE DELETE ON flag BEGIN
    SELECT RAISE(ABORT, 'flags are never deleted: change their status instead');
END;
CREATE TRIGGER flag_event_is_never_changed BEFORE UPDATE ON flag_event BEGIN
    SELECT RAISE(ABORT, 'the flag audit trail is append-only');
END;
CREATE TRIGGER flag_event_is_never_deleted BEFORE DELETE ON flag_event BEGIN
    SELECT RAISE(ABORT, 'the flag audit trail is append-only');
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
