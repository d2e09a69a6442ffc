-- reval database schema, version 1. Later versions are forward migrations in sql/migrations/NNN_name.sql.
CREATE TABLE schema_version (
    version    INTEGER NOT NULL,
    applied_at TIMESTAMP NOT NULL DEFAULT current_timestamp
);

-- The imported data set: replaced as a whole by each successful import.
CREATE TABLE market_areas (
    market_area VARCHAR PRIMARY KEY,
    n_parcels   BIGINT NOT NULL
);

CREATE TABLE segments (
    segment     VARCHAR PRIMARY KEY,
    market_area VARCHAR NOT NULL,
    n_parcels   BIGINT NOT NULL
);

-- The features declared in reval.toml at import; levels in declared order (codes are 0-based positions).
CREATE TABLE features (
    position SMALLINT PRIMARY KEY,
    name     VARCHAR NOT NULL UNIQUE,
    kind     VARCHAR NOT NULL,
    log      BOOLEAN NOT NULL,
    levels   VARCHAR[],
    range_lo DOUBLE,
    range_hi DOUBLE
);

CREATE TABLE parcels (
    parcel_id      VARCHAR PRIMARY KEY,   -- text: leading zeros kept
    segment        VARCHAR NOT NULL,
    market_area    VARCHAR NOT NULL,
    property_class VARCHAR NOT NULL,
    prior_value    DOUBLE,
    latitude       DOUBLE,
    longitude      DOUBLE,
    source_line    BIGINT NOT NULL
);

-- One row per parcel and feature (long form, so any feature list needs no schema change).
-- Ordinal and categorical values are stored as 0-based level codes; NULL = missing.
CREATE TABLE feature_values (
    parcel_id VARCHAR NOT NULL,
    position  SMALLINT NOT NULL,
    value     DOUBLE
);

-- A sale may cover several parcels (same sale_id on several rows: a multi-parcel sale).
CREATE TABLE sales (
    sale_id     VARCHAR NOT NULL,
    parcel_id   VARCHAR NOT NULL,
    sale_date   DATE NOT NULL,
    sale_price  DOUBLE NOT NULL,
    validity    VARCHAR,
    source_line BIGINT NOT NULL,
    PRIMARY KEY (sale_id, parcel_id)
);

-- Files behind the current data set (for idempotent re-import).
CREATE TABLE dataset_files (
    role   VARCHAR PRIMARY KEY,   -- parcels | sales
    path   VARCHAR NOT NULL,
    sha256 VARCHAR NOT NULL,
    n_rows BIGINT NOT NULL
);

-- Append-only audit log: reval only ever inserts here (see reval/events.py).
CREATE SEQUENCE event_ids START 1;
CREATE TABLE events (
    event_id BIGINT PRIMARY KEY DEFAULT nextval('event_ids'),
    event_time TIMESTAMP NOT NULL,
    who      VARCHAR NOT NULL,
    kind     VARCHAR NOT NULL,
    segment  VARCHAR,
    run_id   VARCHAR,
    detail   JSON
);

INSERT INTO schema_version (version) VALUES (1);
