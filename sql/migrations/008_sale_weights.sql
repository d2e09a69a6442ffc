-- Version 8: each sale's weight in a run's robust fit, and the analyst's decisions on single sales.

-- Each qualified sale's weight in a run's fit (1 = full; reval/model/robust.py), its residual (log adjusted price
-- minus the run's log value for it) and why, when below full weight or fixed by the analyst.
CREATE TABLE sale_weights (
    run_id    VARCHAR NOT NULL,
    sale_id   VARCHAR NOT NULL,
    parcel_id VARCHAR NOT NULL,
    weight    DOUBLE NOT NULL,
    residual  DOUBLE,
    reason    VARCHAR,
    PRIMARY KEY (run_id, sale_id, parcel_id)
);

-- The analyst's decision on a sale (all its parcels): 'exclude' (qualification drops it) or 'include' (it keeps
-- full weight in the fit). The latest decision per sale; the history is in the events log. Keyed by sale id
-- alone, so it survives a re-import.
CREATE TABLE sale_decisions (
    sale_id    VARCHAR PRIMARY KEY,
    decision   VARCHAR NOT NULL CHECK (decision IN ('exclude', 'include')),
    reason     VARCHAR NOT NULL,
    decided_at TIMESTAMP NOT NULL,
    who        VARCHAR NOT NULL
);

-- The sales of a stored ratio study's group that the run's fit gave less than full weight: listed beside the
-- statistics, which still use every sale.
CREATE TABLE study_downweighted (
    study_id   VARCHAR NOT NULL,
    group_name VARCHAR NOT NULL,
    sale_id    VARCHAR NOT NULL,
    parcel_id  VARCHAR NOT NULL,
    weight     DOUBLE NOT NULL,
    reason     VARCHAR
);
