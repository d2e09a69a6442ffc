-- The staged rows typed (import_rows) and their cells one by one with their roles (import_cells): views, so each
-- query that reads them streams the staged rows once instead of copying them first.
-- A "sale row" is a row of the sales file that carries a sale; in a combined file (parcels and sales in one file, as
-- in research data) a row without sale date and price is an unsold parcel.
CREATE OR REPLACE TEMP VIEW import_rows AS
WITH layout AS (    -- where each role's cell is in each file's list (NULL: the role is not mapped there)
    SELECT file, any_value(f.parcels) AS parcels, any_value(f.sales) AS sales,
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
    FROM import_roles JOIN import_files f USING (file) GROUP BY file
)
SELECT r.file, r.line, r.cells,
       l.parcels AS is_parcel_row,
       l.sales AND (r.cells[l.sale_date] IS NOT NULL OR r.cells[l.sale_price] IS NOT NULL OR NOT l.parcels) AS is_sale_row,
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
       r.cells[l.sale_date] AS sale_date,   -- text: read by import_day with the configured format
       import_num(r.cells[l.sale_price]) AS sale_price,
       r.cells[l.sale_validity] AS validity
FROM import_raw r JOIN layout l USING (file);

-- Each mapped cell with its role; what depends on the role alone is worked out once per role (checked_roles), not
-- once per cell.
CREATE OR REPLACE TEMP VIEW import_cells AS
WITH checked_roles AS (
    SELECT o.*,
           role NOT IN ('sale_id', 'sale_date', 'sale_price', 'sale_validity') AS parcel_role,
           role IN ('parcel_id', 'sale_id', 'sale_date', 'sale_price', 'sale_validity') AS sale_role,
           role IN ('parcel_id', 'segment', 'market_area', 'property_class') AS required_for_parcel,
           role IN ('parcel_id', 'sale_date', 'sale_price', 'sale_id') AS required_for_sale,
           kind IN ('amount', 'latitude', 'longitude', 'continuous') AS parcel_number,
           kind = 'price' AS sale_number
    FROM import_roles o JOIN import_files f USING (file)
)
SELECT r.file, r.line, r.parcel_id AS row_parcel_id, o.col, o.role, o.name, o.kind, o.position, o.levels, o.lo, o.hi,
       o.log, import_known(r.cells[o.cell], o.missing) AS val,
       r.is_parcel_row AND o.parcel_role AS is_parcel_cell,
       r.is_sale_row AND o.sale_role AS is_sale_cell,
       (r.is_parcel_row AND o.parcel_role AND o.required_for_parcel)
           OR (r.is_sale_row AND o.sale_role AND o.required_for_sale) AS required,
       (r.is_parcel_row AND o.parcel_role AND o.parcel_number) OR (r.is_sale_row AND o.sale_role AND o.sale_number)
           AS numeric
FROM import_rows r JOIN checked_roles o USING (file);
