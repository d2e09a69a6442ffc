-- Version 15: the tables a step replaces as a whole (the imported parcels and sales, the sales step's qualification
-- and adjusted prices) lose their primary keys. DuckDB removes each deleted row from a key's index one by one when
-- the transaction commits: replacing a million parcels took 44 s to commit and 200,000 sales 16 s, for a check the
-- steps already make (the import refuses duplicate parcels and sales; the sales step writes one row per sale and
-- parcel of the sales table). Columns, their order and NOT NULL stay as they were.
CREATE TABLE parcels_v15 (
    parcel_id            VARCHAR NOT NULL,   -- text: leading zeros kept; unique (the import refuses duplicates)
    segment              VARCHAR NOT NULL,
    market_area          VARCHAR NOT NULL,
    property_class       VARCHAR NOT NULL,
    prior_value          DOUBLE,
    latitude             DOUBLE,
    longitude            DOUBLE,
    source_line          BIGINT NOT NULL,
    prior_assessed_value DOUBLE,
    new_construction     BOOLEAN
);
INSERT INTO parcels_v15 SELECT * FROM parcels ORDER BY parcel_id;
DROP TABLE parcels;
ALTER TABLE parcels_v15 RENAME TO parcels;

CREATE TABLE sales_v15 (
    sale_id     VARCHAR NOT NULL,   -- (sale_id, parcel_id) unique: the import refuses a sale listed twice
    parcel_id   VARCHAR NOT NULL,
    sale_date   DATE NOT NULL,
    sale_price  DOUBLE NOT NULL,
    validity    VARCHAR,
    source_line BIGINT NOT NULL
);
INSERT INTO sales_v15 SELECT * FROM sales ORDER BY sale_id, parcel_id;
DROP TABLE sales;
ALTER TABLE sales_v15 RENAME TO sales;

CREATE TABLE sale_qualification_v15 (
    sale_id   VARCHAR NOT NULL,
    parcel_id VARCHAR NOT NULL,
    qualified BOOLEAN NOT NULL,
    reason    VARCHAR             -- NULL when qualified
);
INSERT INTO sale_qualification_v15 SELECT * FROM sale_qualification ORDER BY sale_id, parcel_id;
DROP TABLE sale_qualification;
ALTER TABLE sale_qualification_v15 RENAME TO sale_qualification;

CREATE TABLE adjusted_sales_v15 (
    sale_id        VARCHAR NOT NULL,
    parcel_id      VARCHAR NOT NULL,
    month_offset   DOUBLE NOT NULL,
    trend_area     VARCHAR NOT NULL,
    factor         DOUBLE NOT NULL,
    adjusted_price DOUBLE NOT NULL
);
INSERT INTO adjusted_sales_v15 SELECT * FROM adjusted_sales ORDER BY sale_id, parcel_id;
DROP TABLE adjusted_sales;
ALTER TABLE adjusted_sales_v15 RENAME TO adjusted_sales;
