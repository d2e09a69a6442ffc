-- Typed view of the staged cells, used by the checks and the build.
-- A "sale line" is a row of the sales file that carries a sale; in a combined file (parcels and sales in
-- one file, as in research data) a row without sale date and price is an unsold parcel.
-- $1: parcels file key, $2: sales file key (equals $1 when one file holds both), $3: date format (NULL = ISO
-- dates, YYYY-MM-DD). A feature cell equal to one of the feature's `missing` codes (as text, or as a number
-- when both read as numbers: 0 and 0.0) is read as missing.
CREATE OR REPLACE TEMP TABLE import_cells AS
WITH joined AS (
    SELECT c.file, c.line, c.col,
           CASE WHEN len(r.missing) > 0
                     AND list_bool_or(list_transform(r.missing, lambda m: m = c.val
                                                     OR TRY_CAST(m AS DOUBLE) = TRY_CAST(c.val AS DOUBLE)))
                THEN NULL ELSE c.val END AS val,
           r.role, r.name, r.kind, r.position, r.levels, r.lo, r.hi, r.log
    FROM raw_cells c JOIN import_roles r USING (file, col)
),
sale_lines AS (
    SELECT DISTINCT file, line FROM joined
    WHERE file = $2 AND role IN ('sale_date', 'sale_price')
      AND (val IS NOT NULL OR $2 <> $1)
)
SELECT j.*,
       (j.file = $1 AND (j.role NOT IN ('sale_id', 'sale_date', 'sale_price', 'sale_validity')))
           AS is_parcel_cell,
       (s.line IS NOT NULL AND j.role IN ('parcel_id', 'sale_id', 'sale_date', 'sale_price', 'sale_validity'))
           AS is_sale_cell,
       TRY_CAST(j.val AS DOUBLE) AS num,
       CASE WHEN $3 IS NOT NULL THEN CAST(try_strptime(j.val, $3) AS DATE)
            WHEN regexp_full_match(j.val, '\d{4}-\d{1,2}-\d{1,2}') THEN TRY_CAST(j.val AS DATE)
       END AS day   -- ISO dates only: DuckDB would also read 'epoch', 'infinity' and '-2023-01-01' (BC)
FROM joined j
LEFT JOIN sale_lines s ON s.file = j.file AND s.line = j.line;
