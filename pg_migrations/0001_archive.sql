-- The shared archive on PostgreSQL: every campaign's shared rows, keyed by the campaign's uid
-- and each row's own uid (the 36-character uids of the campaign files, schema 10), references
-- as uids. Logger records have no uid: (campaign, site uid, sensor id, time) is their key.
-- Applied by `porewise archive init` inside the archive's own schema (search_path is set to it).
-- Foreign keys are DEFERRABLE: a push defers them, so it can replace rows in any order.

CREATE TABLE campaign (
    uid text PRIMARY KEY CHECK (length(uid) = 36),
    name text NOT NULL CHECK (length(name) > 0),
    description text,
    fc_kpa double precision NOT NULL CHECK (fc_kpa > 0),
    pwp_kpa double precision NOT NULL CHECK (pwp_kpa > fc_kpa),
    created_at text NOT NULL,
    texture_prior_max_readings bigint,
    -- Bookkeeping of the archive itself, not part of the campaign's content.
    first_pushed_at timestamptz NOT NULL DEFAULT now(),
    last_pushed_at timestamptz NOT NULL DEFAULT now(),
    pushes bigint NOT NULL DEFAULT 0,
    fingerprint text
);
CREATE INDEX campaign_name ON campaign (name);

CREATE TABLE import_batch (
    campaign_uid text NOT NULL REFERENCES campaign (uid) DEFERRABLE,
    uid text NOT NULL CHECK (length(uid) = 36),
    file_name text NOT NULL,
    sha256 text NOT NULL,
    kind text NOT NULL,
    rows bigint NOT NULL,
    forced boolean NOT NULL,
    imported_at text NOT NULL,
    PRIMARY KEY (campaign_uid, uid)
);

CREATE TABLE site (
    campaign_uid text NOT NULL REFERENCES campaign (uid) DEFERRABLE,
    uid text NOT NULL CHECK (length(uid) = 36),
    code text NOT NULL,
    name text,
    latitude double precision,
    longitude double precision,
    elevation_m double precision,
    notes text,
    batch_uid text,
    PRIMARY KEY (campaign_uid, uid),
    UNIQUE (campaign_uid, code)
);

CREATE TABLE layer (
    campaign_uid text NOT NULL REFERENCES campaign (uid) DEFERRABLE,
    uid text NOT NULL CHECK (length(uid) = 36),
    site_uid text NOT NULL,
    top_cm double precision NOT NULL,
    bottom_cm double precision NOT NULL,
    horizon text,
    sand_pct double precision,
    silt_pct double precision,
    clay_pct double precision,
    organic_carbon_pct double precision,
    bulk_density_g_cm3 double precision,
    ks_cm_per_day double precision,
    batch_uid text,
    -- USDA texture class name computed at push from sand, silt and clay (NULL without them).
    texture_class text,
    PRIMARY KEY (campaign_uid, uid),
    FOREIGN KEY (campaign_uid, site_uid) REFERENCES site (campaign_uid, uid) DEFERRABLE
);
CREATE INDEX layer_texture ON layer (texture_class);
CREATE INDEX layer_horizon ON layer (lower(horizon));
CREATE INDEX layer_depth ON layer (top_cm, bottom_cm);

CREATE TABLE sample (
    campaign_uid text NOT NULL REFERENCES campaign (uid) DEFERRABLE,
    uid text NOT NULL CHECK (length(uid) = 36),
    layer_uid text NOT NULL,
    code text NOT NULL,
    kind text NOT NULL,
    collected_on text,
    bulk_density_g_cm3 double precision,
    notes text,
    batch_uid text,
    ks_cm_per_day double precision,
    ks_batch_uid text,
    PRIMARY KEY (campaign_uid, uid),
    UNIQUE (campaign_uid, code),
    FOREIGN KEY (campaign_uid, layer_uid) REFERENCES layer (campaign_uid, uid) DEFERRABLE
);
CREATE INDEX sample_layer ON sample (campaign_uid, layer_uid);

CREATE TABLE reading (
    campaign_uid text NOT NULL REFERENCES campaign (uid) DEFERRABLE,
    uid text NOT NULL CHECK (length(uid) = 36),
    sample_uid text NOT NULL,
    h_cm double precision NOT NULL,
    theta double precision NOT NULL,
    method text,
    measured_at text,
    branch text NOT NULL,
    weight double precision,
    notes text,
    batch_uid text,
    source_line bigint,
    PRIMARY KEY (campaign_uid, uid),
    FOREIGN KEY (campaign_uid, sample_uid) REFERENCES sample (campaign_uid, uid) DEFERRABLE
);
CREATE INDEX reading_sample ON reading (campaign_uid, sample_uid);

CREATE TABLE conductivity_reading (
    campaign_uid text NOT NULL REFERENCES campaign (uid) DEFERRABLE,
    uid text NOT NULL CHECK (length(uid) = 36),
    sample_uid text NOT NULL,
    h_cm double precision,
    theta double precision,
    k_cm_per_day double precision NOT NULL,
    method text,
    measured_at text,
    notes text,
    batch_uid text,
    source_line bigint,
    PRIMARY KEY (campaign_uid, uid),
    FOREIGN KEY (campaign_uid, sample_uid) REFERENCES sample (campaign_uid, uid) DEFERRABLE
);

CREATE TABLE fit (
    campaign_uid text NOT NULL REFERENCES campaign (uid) DEFERRABLE,
    uid text NOT NULL CHECK (length(uid) = 36),
    sample_uid text NOT NULL,
    model text NOT NULL,
    -- JSON kept as the campaign file holds it (text, byte for byte); cast to jsonb to query.
    parameters text NOT NULL,
    standard_errors text,
    covariance text,
    statistics text NOT NULL,
    n_points bigint NOT NULL,
    -- SHA-256 of the readings it used by uid (NULL for a stale fit; store::exchange).
    readings_key text,
    created_at text NOT NULL,
    is_current boolean NOT NULL,
    status text NOT NULL,
    message text,
    requested text,
    fixed text,
    report text,
    ranking text,
    reading_uids text[],
    conductivity text,
    joint text,
    -- Derived at push under the campaign's field capacity and wilting point (analysis::water),
    -- m3/m3; NULL where the fit gives none.
    theta_fc double precision,
    theta_pwp double precision,
    available_water double precision,
    available_water_lo95 double precision,
    available_water_hi95 double precision,
    PRIMARY KEY (campaign_uid, uid),
    FOREIGN KEY (campaign_uid, sample_uid) REFERENCES sample (campaign_uid, uid) DEFERRABLE
);
CREATE INDEX fit_sample ON fit (campaign_uid, sample_uid);
CREATE INDEX fit_current_model ON fit (model, campaign_uid, sample_uid) WHERE is_current;

-- Byte order (COLLATE "C") on the key, as the campaign files sort it, so reading a campaign's
-- records in key order walks the primary key.
CREATE TABLE logger_record (
    campaign_uid text NOT NULL REFERENCES campaign (uid) DEFERRABLE,
    site_uid text COLLATE "C" NOT NULL,
    sensor_id text COLLATE "C" NOT NULL,
    time text COLLATE "C" NOT NULL,  -- UTC, YYYY-MM-DDTHH:MM:SSZ as the campaign file holds it
    depth_cm double precision NOT NULL,
    sensor text NOT NULL,
    value double precision NOT NULL,
    batch_uid text,
    source_line bigint,
    PRIMARY KEY (campaign_uid, site_uid, sensor_id, time)
);

CREATE TABLE flag (
    campaign_uid text NOT NULL REFERENCES campaign (uid) DEFERRABLE,
    uid text NOT NULL CHECK (length(uid) = 36),
    reading_uid text,
    -- A flag on a logger record names the record by its natural key.
    logger_site_uid text,
    logger_sensor_id text,
    logger_time text,
    conductivity_reading_uid text,
    reason text NOT NULL,
    score double precision,
    origin text NOT NULL,
    status text NOT NULL,
    note text,
    created_at text NOT NULL,
    decided_at text,
    rule text,
    decided_by text,
    PRIMARY KEY (campaign_uid, uid)
);

CREATE TABLE flag_event (
    campaign_uid text NOT NULL REFERENCES campaign (uid) DEFERRABLE,
    uid text NOT NULL CHECK (length(uid) = 36),
    flag_uid text NOT NULL,
    from_status text,
    to_status text NOT NULL,
    actor text NOT NULL,
    note text,
    at text NOT NULL,
    PRIMARY KEY (campaign_uid, uid),
    FOREIGN KEY (campaign_uid, flag_uid) REFERENCES flag (campaign_uid, uid) DEFERRABLE
);
