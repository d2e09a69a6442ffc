-- Version 11: a run knows its data; prior market and prior assessed values are separate roles; the assessed
-- value is split into land and improvement; contributions are measured from a stated reference parcel.

-- What a run's model read for each parcel (reval/data/fingerprint.py): `reval value` refuses a run whose
-- parcels or sales differ from the current import. NULL for runs made before this version.
ALTER TABLE parcel_estimates ADD COLUMN data_md5 VARCHAR;

-- Per segment: the qualified, time-adjusted sales and the analyst's sale decisions a run was fitted on.
CREATE TABLE run_sales_fingerprints (
    run_id   VARCHAR NOT NULL,
    segment  VARCHAR NOT NULL,
    n_sales  BIGINT NOT NULL,
    data_md5 VARCHAR NOT NULL,
    PRIMARY KEY (run_id, segment)
);

-- parcels.prior_value and roll_values.prior_value keep their name and now mean the prior MARKET value
-- ([columns] prior_market_value); the prior ASSESSED value (the base of caps) is its own role.
ALTER TABLE parcels ADD COLUMN prior_assessed_value DOUBLE;
ALTER TABLE parcels ADD COLUMN new_construction BOOLEAN;   -- [columns] new_construction (caps may exclude it)
ALTER TABLE roll_values ADD COLUMN prior_assessed_value DOUBLE;
ALTER TABLE roll_values ADD COLUMN assessed_land_value DOUBLE;         -- the assessed value split like the
ALTER TABLE roll_values ADD COLUMN assessed_improvement_value DOUBLE;  -- market value (exact currency split)

-- The reference parcel of each segment in a run: contributions are measured from it (reval/model/reference.py).
CREATE TABLE segment_references (
    run_id   VARCHAR NOT NULL,
    segment  VARCHAR NOT NULL,
    feature  VARCHAR NOT NULL,
    value    DOUBLE,             -- raw value (a level code for ordinal, categorical and binary); NULL: none known
    shown    VARCHAR NOT NULL,   -- the value as a reader sees it (a level's name, yes/no)
    how      VARCHAR NOT NULL,   -- median | lower median | baseline (config) | most common
    PRIMARY KEY (run_id, segment, feature)
);
