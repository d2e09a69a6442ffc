-- Version 14: the structure each run's model chose by evidence on its training sales (reval/model/structure.py):
-- per step of a choice, every candidate with its criterion's value (GCV, inner cross-validation error, mean
-- absolute leave-one-out residual) and whether it was chosen.
CREATE TABLE run_structure (
    run_id    VARCHAR NOT NULL,
    step      INTEGER NOT NULL,
    choice    VARCHAR NOT NULL,
    candidate VARCHAR NOT NULL,
    criterion VARCHAR NOT NULL,
    value     DOUBLE,
    chosen    BOOLEAN NOT NULL,
    PRIMARY KEY (run_id, step, choice, candidate, criterion)
);
