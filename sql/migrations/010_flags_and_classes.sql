-- Version 10: flags a reviewer reads on every roll value, and property classes valued without the model.

-- What a run filled in for each feature: the value the model takes where a parcel's value is missing (its
-- typical value among the sales it was fitted on) and how many parcels of the roll lacked it.
CREATE TABLE run_features (
    run_id     VARCHAR NOT NULL,
    feature    VARCHAR NOT NULL,
    position   SMALLINT NOT NULL,
    fill_value DOUBLE NOT NULL,
    n_filled   BIGINT NOT NULL,
    PRIMARY KEY (run_id, feature)
);

-- A parcel of a class left for a manual value ([classes] not_valued) has no market or assessed value; its
-- segment cannot be approved until it is valued (reval/roll/flags.py, `approval_blockers`).
ALTER TABLE roll_values ALTER COLUMN market_value DROP NOT NULL;
ALTER TABLE roll_values ALTER COLUMN assessed_value DROP NOT NULL;
-- The flags in words, for people (the `flags` column holds the codes, for machines).
ALTER TABLE roll_values ADD COLUMN flag_text VARCHAR;
