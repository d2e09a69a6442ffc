-- Write the value roll of the given batches to $path as CSV, rows ordered by segment and parcel id, its cells
-- as sql/queries/csv_cells.sql says (run first). Numbers are plain fixed decimals (never scientific notation).
-- $path, $batch_ids.
COPY (
    SELECT export_text(v.parcel_id) AS parcel_id,
           export_text(b.segment) AS segment,
           export_text(v.property_class) AS property_class,
           export_number(v.prior_value) AS prior_value,
           export_number(v.market_value) AS market_value,
           export_number(v.land_value) AS land_value,
           export_number(v.improvement_value) AS improvement_value,
           export_number(v.assessed_value) AS assessed_value,
           export_number(CASE WHEN v.prior_value > 0 THEN 100 * (v.market_value / v.prior_value - 1) END)
               AS change_pct,
           export_text(b.run_id) AS run_id,
           b.batch_id,
           export_text(nullif(array_to_string(v.flags, ';'), '')) AS flags
    FROM roll_values v JOIN batches b ON b.batch_id = v.batch_id
    WHERE list_contains($batch_ids::BIGINT[], v.batch_id)
    ORDER BY b.segment, v.parcel_id
) TO $path (HEADER, DELIMITER ',');
