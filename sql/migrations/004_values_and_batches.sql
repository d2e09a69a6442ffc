-- Version 4: the value roll. `reval value` stages one batch per segment from a run's parcel estimates;
-- a batch moves staged -> approved | held, approved -> exported (or back to staged when revoked before
-- export). A newer value step marks open (staged, held) batches 'replaced'; approving a newer batch marks
-- the segment's earlier approved one 'superseded'. Exported batches never change. Every transition is an
-- event (see reval/batches.py).
CREATE SEQUENCE batch_ids START 1;
CREATE TABLE batches (
    batch_id     BIGINT PRIMARY KEY DEFAULT nextval('batch_ids'),
    segment      VARCHAR NOT NULL,
    run_id       VARCHAR NOT NULL,
    state        VARCHAR NOT NULL,   -- staged | held | approved | exported | replaced | superseded
    basis_sha256 VARCHAR NOT NULL,   -- the config and land schedule the values were made with
    n_parcels    BIGINT NOT NULL,
    created_at   TIMESTAMP NOT NULL,
    changed_at   TIMESTAMP NOT NULL,
    approved_at  TIMESTAMP,
    note         VARCHAR             -- the latest override note, hold reason or revoke note
);

-- One row per parcel of a batch. No key index: the rows come from parcel_estimates (unique per run and
-- parcel) and an index would cost more than it guards at a million parcels.
CREATE TABLE roll_values (
    batch_id          BIGINT NOT NULL,
    parcel_id         VARCHAR NOT NULL,
    property_class    VARCHAR NOT NULL,
    prior_value       DOUBLE,
    market_value      DOUBLE NOT NULL,   -- the run's estimate, rounded
    land_value        DOUBLE,            -- NULL when the split is not allocated (see flags)
    improvement_value DOUBLE,
    assessed_value    DOUBLE NOT NULL,   -- market value x assessment level, rounded, capped
    flags             VARCHAR[] NOT NULL -- each rule that changed or withheld a value
);
