-- Typed rows of the new data set, built from the checked cells (temporary until import_replace).
CREATE OR REPLACE TEMP TABLE new_parcels AS
SELECT max(val) FILTER (WHERE role = 'parcel_id') AS parcel_id,
       max(val) FILTER (WHERE role = 'segment') AS segment,
       coalesce(max(val) FILTER (WHERE role = 'market_area'), 'all') AS market_area,
       coalesce(max(val) FILTER (WHERE role = 'property_class'), 'unclassified') AS property_class,
       max(num) FILTER (WHERE role = 'prior_market_value') AS prior_value,
       max(num) FILTER (WHERE role = 'prior_assessed_value') AS prior_assessed_value,
       max(lower(val) IN ('1', 'true', 'yes', 'y', 't')) FILTER (WHERE role = 'new_construction') AS new_construction,
       max(num) FILTER (WHERE role = 'latitude') AS latitude,
       max(num) FILTER (WHERE role = 'longitude') AS longitude,
       line AS source_line
FROM import_cells WHERE is_parcel_cell GROUP BY line;

CREATE OR REPLACE TEMP TABLE new_feature_values AS
SELECT p.parcel_id, c.position,
       CASE c.kind
           WHEN 'continuous' THEN c.num
           WHEN 'binary' THEN CASE WHEN c.val IS NULL THEN NULL
                                   WHEN lower(c.val) IN ('1', 'true', 'yes', 'y', 't') THEN 1.0 ELSE 0.0 END
           ELSE CAST(list_position(c.levels, c.val) - 1 AS DOUBLE)
       END AS value
FROM import_cells c JOIN new_parcels p ON p.source_line = c.line
WHERE c.is_parcel_cell AND c.role = 'feature';

CREATE OR REPLACE TEMP TABLE new_sales AS
SELECT coalesce(max(val) FILTER (WHERE role = 'sale_id'), 'line ' || line) AS sale_id,
       max(val) FILTER (WHERE role = 'parcel_id') AS parcel_id,
       max(day) FILTER (WHERE role = 'sale_date') AS sale_date,
       max(num) FILTER (WHERE role = 'sale_price') AS sale_price,
       max(val) FILTER (WHERE role = 'sale_validity') AS validity,
       line AS source_line
FROM import_cells WHERE is_sale_cell GROUP BY line;
