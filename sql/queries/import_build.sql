-- The new data set, read from the checked rows (import_cells.sql) by import_replace: parcels and their feature values
-- as views, so a million rows stream into the tables once instead of being copied first; the sales as a table (their
-- dates are read with the configured format, a bound parameter, which a view cannot hold). $date_format.
CREATE OR REPLACE TEMP VIEW new_parcels AS
SELECT parcel_id, segment, coalesce(market_area, 'all') AS market_area,
       coalesce(property_class, 'unclassified') AS property_class, prior_value, prior_assessed_value,
       new_construction, latitude, longitude, line AS source_line
FROM import_rows WHERE is_parcel_row;

CREATE OR REPLACE TEMP VIEW new_feature_values AS
SELECT row_parcel_id AS parcel_id, position,
       CASE kind
           WHEN 'continuous' THEN import_num(val)
           WHEN 'binary' THEN CASE WHEN val IS NULL THEN NULL WHEN import_yes(val) THEN 1.0 ELSE 0.0 END
           ELSE CAST(list_position(levels, val) - 1 AS DOUBLE)
       END AS value
FROM import_cells WHERE is_parcel_cell AND role = 'feature';

CREATE OR REPLACE TEMP TABLE new_sales AS
SELECT sale_id, parcel_id, import_day(sale_date, $date_format) AS sale_date, sale_price, validity, line AS source_line
FROM import_rows WHERE is_sale_row;
