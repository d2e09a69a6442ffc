-- The staged rows typed, once (import_rows: a table), and their cells one by one (import_cells: a view, streamed by
-- each query that reads it), for the checks and the build.
-- A "sale row" is a row of the sales file that carries a sale; in a combined file (parcels and sales in one file, as
-- in research data) a row without sale date and price is an unsold parcel.
-- $1: parcels file key, $2: sales file key (equals $1 when one file holds both), $3: date format (NULL = ISO dates).
CREATE OR REPLACE TEMP TABLE import_rows AS
WITH layout AS (    -- where each role's cell is in each file's list (NULL: the role is not mapped there)
    SELECT file,
           max(cell) FILTER (WHERE role = 'parcel_id') AS parcel_id,
           max(cell) FILTER (WHERE role = 'segment') AS segment,
           max(cell) FILTER (WHERE role = 'market_area') AS market_area,
           max(cell) FILTER (WHERE role = 'property_class') AS property_class,
           max(cell) FILTER (WHERE role = 'prior_market_value') AS prior_market_value,
           max(cell) FILTER (WHERE role = 'prior_assessed_value') AS prior_assessed_value,
           max(cell) FILTER (WHERE role = 'new_construction') AS new_construction,
           max(cell) FILTER (WHERE role = 'latitude') AS latitude,
           max(cell) FILTER (WHERE role = 'longitude') AS longitude,
           max(cell) FILTER (WHERE role = 'sale_id') AS sale_id,
           max(cell) FILTER (WHERE role = 'sale_date') AS sale_date,
           max(cell) FILTER (WHERE role = 'sale_price') AS sale_price,
           max(cell) FILTER (WHERE role = 'sale_validity') AS sale_validity
    FROM import_roles GROUP BY file
)
SELECT r.file, r.line, r.cells,
       r.file = $1 AS is_parcel_row,
       r.file = $2 AND (r.cells[l.sale_date] IS NOT NULL OR r.cells[l.sale_price] IS NOT NULL OR $2 <> $1) AS is_sale_row,
       r.cells[l.parcel_id] AS parcel_id,
       r.cells[l.segment] AS segment,
       r.cells[l.market_area] AS market_area,
       r.cells[l.property_class] AS property_class,
       import_num(r.cells[l.prior_market_value]) AS prior_value,
       import_num(r.cells[l.prior_assessed_value]) AS prior_assessed_value,
       import_yes(r.cells[l.new_construction]) AS new_construction,
       import_num(r.cells[l.latitude]) AS latitude,
       import_num(r.cells[l.longitude]) AS longitude,
       coalesce(r.cells[l.sale_id], 'line ' || r.line) AS sale_id,
       import_day(r.cells[l.sale_date], $3) AS sale_date,
       import_num(r.cells[l.sale_price]) AS sale_price,
       r.cells[l.sale_validity] AS validity
FROM import_raw r JOIN layout l USING (file);
DROP TABLE import_raw;

CREATE OR REPLACE TEMP VIEW import_cells AS
SELECT r.file, r.line, r.parcel_id AS row_parcel_id, o.col, o.role, o.name, o.kind, o.position, o.levels, o.lo, o.hi,
       o.log, import_known(r.cells[o.cell], o.missing) AS val,
       r.is_parcel_row AND o.role NOT IN ('sale_id', 'sale_date', 'sale_price', 'sale_validity') AS is_parcel_cell,
       r.is_sale_row AND o.role IN ('parcel_id', 'sale_id', 'sale_date', 'sale_price', 'sale_validity') AS is_sale_cell
FROM import_rows r JOIN import_roles o USING (file);
