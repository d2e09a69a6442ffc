-- Version 12: values the analyst sets over the model's, and single-parcel data corrections without a refit.

-- The override layer: at most one standing override per parcel, above the model's value. Keyed by parcel id
-- alone, so it survives refits, re-stages and re-imports; every set and removal is an event (the history).
CREATE TABLE overrides (
    parcel_id VARCHAR PRIMARY KEY,
    value     DOUBLE NOT NULL,    -- the market value the analyst set
    reason    VARCHAR NOT NULL,   -- a code of [overrides] reasons
    note      VARCHAR,
    set_at    TIMESTAMP NOT NULL,
    who       VARCHAR NOT NULL
);

-- A roll row keeps the model's value beside the value on the roll, and the override's reason when one set it.
ALTER TABLE roll_values ADD COLUMN model_value DOUBLE;        -- the run's estimate, rounded
ALTER TABLE roll_values ADD COLUMN override_reason VARCHAR;   -- NULL: the market value is the model's

-- When a batch's values stopped matching the data or the overrides (a correction or an override after it
-- was staged): the segment needs a new `reval value` and a new decision (reval/roll/batch_states.py).
ALTER TABLE batches ADD COLUMN outdated_at TIMESTAMP;

-- A run's fitted model, so one parcel can be revalued with it (`reval correct`) without a refit.
CREATE TABLE run_models (
    run_id VARCHAR PRIMARY KEY,
    format VARCHAR NOT NULL,   -- how `model` is encoded (reval/model/stored.py)
    model  BLOB NOT NULL
);
