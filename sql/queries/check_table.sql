-- The temporary tables of one `reval check` (the database itself is only read): check_rows, one row per
-- problem found, and check_sold, the parcels whose sales count. A parcel's sales count when they qualified at
-- the last sales step ($prepared), else when they fall in the sale window ($start to $valuation_date).
-- check_number shows a number to read (thousands separated); check_value shows a stored feature value as
-- imported (the level's name, yes/no, or the plain number).
CREATE OR REPLACE TEMP TABLE check_rows (
    segment   VARCHAR NOT NULL,
    parcel_id VARCHAR NOT NULL,
    sale_id   VARCHAR,
    code      VARCHAR NOT NULL,
    feature   VARCHAR,
    value     VARCHAR,
    problem   VARCHAR NOT NULL
);
CREATE OR REPLACE TEMP TABLE check_sold AS
SELECT DISTINCT s.parcel_id
FROM sales s LEFT JOIN sale_qualification q USING (sale_id, parcel_id)
WHERE CASE WHEN $prepared THEN coalesce(q.qualified, false)
           ELSE s.sale_date BETWEEN $start AND $valuation_date END;
CREATE OR REPLACE TEMP MACRO check_number(x) AS
    CASE WHEN abs(x) >= 1000 THEN format('{:,.0f}', x::DOUBLE) ELSE format('{:.4g}', x::DOUBLE) END;
CREATE OR REPLACE TEMP MACRO check_value(kind, levels, v) AS
    CASE WHEN v IS NULL THEN NULL
         WHEN kind IN ('ordinal', 'categorical') THEN levels[v::INTEGER + 1]
         WHEN kind = 'binary' THEN CASE WHEN v = 1 THEN 'yes' ELSE 'no' END
         WHEN v = round(v) AND abs(v) < 1e15 THEN CAST(CAST(v AS BIGINT) AS VARCHAR)
         ELSE CAST(v AS VARCHAR) END;
