-- Version 7: files being published (a value roll and its manifest). A row is written before the files'
-- temporary copies, marked 'committed' in the transaction that records what the files mean (the export
-- event and batch states), and deleted once both files are in place. Whoever opens the project next for
-- writing finishes a committed row (renames) or cleans a 'writing' one (see reval/data/publish.py).
CREATE SEQUENCE publication_ids START 1;
CREATE TABLE publications (
    publication_id BIGINT PRIMARY KEY DEFAULT nextval('publication_ids'),
    state          VARCHAR NOT NULL,   -- writing | committed
    target         VARCHAR NOT NULL,   -- the main file (the roll), renamed last
    target_tmp     VARCHAR NOT NULL,
    companion      VARCHAR NOT NULL,   -- the file describing it (the manifest), renamed first
    companion_tmp  VARCHAR NOT NULL,
    overwrite      BOOLEAN NOT NULL,  -- whether the export may replace existing files
    started_at     TIMESTAMP NOT NULL
);
