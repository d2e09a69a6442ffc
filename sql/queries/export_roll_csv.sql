-- Write the value roll of the given batches to $path as CSV, rows ordered by segment and parcel id, its cells
-- as sql/queries/csv_cells.sql says (run first); `flags` holds the codes (separated by ;) and `flag_text` the
-- same flags in words (reval/roll/flags.py). The market value is the override where the analyst set one
-- (overridden = yes), with the model's value and the reason beside it. Numbers are plain fixed decimals
-- (never scientific notation). $path, $batch_ids.
COPY (
    SELECT export_text(v.parcel_id) AS parcel_id,
           export_text(b.segment) AS segment,
           export_text(v.property_class) AS property_class,
           export_number(v.prior_value) AS prior_market_value,
           export_number(v.prior_assessed_value) AS prior_assessed_value,
           export_number(v.market_value) AS market_value,
           export_number(v.land_value) AS land_value,
           export_number(v.improvement_value) AS improvement_value,
           export_number(v.assessed_value) AS assessed_value,
           export_number(v.assessed_land_value) AS assessed_land_value,
           export_number(v.assessed_improvement_value) AS assessed_improvement_value,
           export_number(CASE WHEN v.prior_value > 0 THEN 100 * (v.market_value / v.prior_value - 1) END)
               AS change_pct,
           export_text(b.run_id) AS run_id,
           b.batch_id,
           export_text(nullif(array_to_string(v.flags, ';'), '')) AS flags,
           export_text(v.flag_text) AS flag_text,
           CASE WHEN v.override_reason IS NULL THEN 'no' ELSE 'yes' END AS overridden,
           export_number(v.model_value) AS model_value,
           export_text(v.override_reason) AS override_reason
    FROM roll_values v JOIN batches b ON b.batch_id = v.batch_id
    WHERE list_contains($batch_ids::BIGINT[], v.batch_id)
    ORDER BY b.segment, v.parcel_id
) TO $path (HEADER, DELIMITER ',');
