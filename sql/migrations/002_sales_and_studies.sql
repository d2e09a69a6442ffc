-- Version 2: sales qualification, the market trend, time-adjusted prices and stored ratio studies.

-- One row per sale and parcel: kept, or excluded with the first rule that excluded it.
CREATE TABLE sale_qualification (
    sale_id   VARCHAR NOT NULL,
    parcel_id VARCHAR NOT NULL,
    qualified BOOLEAN NOT NULL,
    reason    VARCHAR,            -- NULL when qualified
    PRIMARY KEY (sale_id, parcel_id)
);

-- The estimated monthly market index, per area ('jurisdiction' or a market area).
CREATE TABLE market_trend (
    area         VARCHAR NOT NULL,
    month_offset INTEGER NOT NULL,  -- months before (negative) the valuation month
    log_index    DOUBLE NOT NULL,   -- log price level relative to the valuation month
    lo           DOUBLE NOT NULL,
    hi           DOUBLE NOT NULL,
    n_sales      INTEGER NOT NULL,
    PRIMARY KEY (area, month_offset)
);

-- Qualified sales expressed at the valuation date.
CREATE TABLE adjusted_sales (
    sale_id        VARCHAR NOT NULL,
    parcel_id      VARCHAR NOT NULL,
    month_offset   INTEGER NOT NULL,
    trend_area     VARCHAR NOT NULL,
    factor         DOUBLE NOT NULL,
    adjusted_price DOUBLE NOT NULL,
    PRIMARY KEY (sale_id, parcel_id)
);

-- Ratio studies, stored so the app reads them without recomputing.
-- values_source: 'prior' (prior roll values), 'model_in_sample' or 'model_out_of_fold'.
CREATE TABLE studies (
    study_id      VARCHAR PRIMARY KEY,
    created_at    TIMESTAMP NOT NULL,
    values_source VARCHAR NOT NULL,
    run_id        VARCHAR,
    grouping      VARCHAR NOT NULL,   -- segment | market_area | class | all
    trim_iqr_k    DOUBLE,
    confidence    DOUBLE NOT NULL,
    n_boot        INTEGER NOT NULL,
    seed          INTEGER NOT NULL,
    config_sha256 VARCHAR NOT NULL
);

CREATE TABLE study_groups (
    study_id            VARCHAR NOT NULL,
    group_name          VARCHAR NOT NULL,
    property_class      VARCHAR,        -- the class whose COD limit applied
    n                   INTEGER NOT NULL,
    n_trimmed           INTEGER NOT NULL,
    median_ratio        DOUBLE, median_lo DOUBLE, median_hi DOUBLE,
    mean_ratio          DOUBLE,
    weighted_mean_ratio DOUBLE,
    cod                 DOUBLE, cod_lo DOUBLE, cod_hi DOUBLE,
    prd                 DOUBLE, prd_lo DOUBLE, prd_hi DOUBLE,
    prb                 DOUBLE, prb_lo DOUBLE, prb_hi DOUBLE,
    decile_medians      DOUBLE[],
    verdicts            JSON NOT NULL,
    PRIMARY KEY (study_id, group_name)
);

-- Sales trimmed as outliers from a study group: listed, never dropped silently.
CREATE TABLE study_trimmed (
    study_id   VARCHAR NOT NULL,
    group_name VARCHAR NOT NULL,
    sale_id    VARCHAR NOT NULL,
    parcel_id  VARCHAR NOT NULL,
    ratio      DOUBLE NOT NULL
);
