-- Version 3: model runs and everything the app and the exports read from them (nothing is refitted to
-- display it). Log values are natural logs of value at the valuation date.

CREATE TABLE runs (
    run_id           VARCHAR PRIMARY KEY,
    created_at       TIMESTAMP NOT NULL,
    config_sha256    VARCHAR NOT NULL,
    data_sha256      VARCHAR NOT NULL,   -- hash of the prepared sales and parcel features used
    seed             INTEGER NOT NULL,
    folds            INTEGER NOT NULL,
    settings         JSON NOT NULL,      -- the [model] settings in force
    library_versions JSON NOT NULL,
    timings          JSON NOT NULL       -- seconds per stage
);

-- One row per segment and run: how its model was made and how much it borrowed from its parent.
CREATE TABLE segment_models (
    run_id         VARCHAR NOT NULL,
    segment        VARCHAR NOT NULL,
    market_area    VARCHAR NOT NULL,
    kind           VARCHAR NOT NULL,     -- own | pooled | parent_only
    reason         VARCHAR,
    n_sales        INTEGER NOT NULL,
    edf_deviation  DOUBLE,               -- effective degrees of freedom of the segment's own deviation
    borrowed_share DOUBLE,               -- 1 = all from the parent, 0 = all its own
    interactions   JSON NOT NULL,        -- selected pairs
    detail         JSON NOT NULL,        -- penalties and other fit details
    PRIMARY KEY (run_id, segment)
);

-- Each feature's curve on a grid, with its band and the parent's curve (log-value units).
CREATE TABLE model_curves (
    run_id        VARCHAR NOT NULL,
    segment       VARCHAR NOT NULL,
    feature       VARCHAR NOT NULL,
    x             DOUBLE NOT NULL,
    effect        DOUBLE NOT NULL,
    lo            DOUBLE NOT NULL,
    hi            DOUBLE NOT NULL,
    parent_effect DOUBLE
);

CREATE TABLE model_interactions (
    run_id  VARCHAR NOT NULL,
    segment VARCHAR NOT NULL,
    term    VARCHAR NOT NULL,   -- "a:b"
    coef    DOUBLE NOT NULL,
    se      DOUBLE,
    p_value DOUBLE
);

CREATE TABLE marginal_effects (
    run_id         VARCHAR NOT NULL,
    segment        VARCHAR NOT NULL,
    feature        VARCHAR NOT NULL,
    value_per_unit DOUBLE,   -- currency per unit of the feature at the segment's median parcel
    elasticity     DOUBLE    -- % change in value per % change in the feature
);

-- Every qualified sale: its fold, in-sample and out-of-fold log value.
CREATE TABLE sale_predictions (
    run_id       VARCHAR NOT NULL,
    sale_id      VARCHAR NOT NULL,
    parcel_id    VARCHAR NOT NULL,
    fold         SMALLINT NOT NULL,
    insample_log DOUBLE NOT NULL,
    oof_log      DOUBLE NOT NULL,
    PRIMARY KEY (run_id, sale_id, parcel_id)
);

-- Every parcel, sold or not: the model's estimate at the valuation date.
CREATE TABLE parcel_estimates (
    run_id       VARCHAR NOT NULL,
    parcel_id    VARCHAR NOT NULL,
    segment      VARCHAR NOT NULL,
    log_value    DOUBLE NOT NULL,
    market_value DOUBLE NOT NULL,
    PRIMARY KEY (run_id, parcel_id)
);

-- Each parcel's log value split into additive parts: term '(base)' is the intercept; the parts of a parcel
-- sum exactly to its log_value.
CREATE TABLE parcel_contributions (
    run_id       VARCHAR NOT NULL,
    parcel_id    VARCHAR NOT NULL,
    term         VARCHAR NOT NULL,
    contribution DOUBLE NOT NULL
);

-- Reference models on the same folds (what interpretability costs), per segment and overall ('(all)').
CREATE TABLE reference_accuracy (
    run_id       VARCHAR NOT NULL,
    model        VARCHAR NOT NULL,
    segment      VARCHAR NOT NULL,
    n            INTEGER NOT NULL,
    rmse_log     DOUBLE,
    median_ratio DOUBLE,
    cod          DOUBLE,
    prd          DOUBLE,
    prb          DOUBLE,
    seconds      DOUBLE
);

CREATE TABLE feature_importance (
    run_id          VARCHAR NOT NULL,
    feature         VARCHAR NOT NULL,
    importance_mean DOUBLE NOT NULL,
    importance_std  DOUBLE NOT NULL
);
