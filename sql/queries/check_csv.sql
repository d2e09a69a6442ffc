-- Write every check row to $path as CSV (cells as sql/queries/csv_cells.sql says), ordered by segment, parcel
-- and check.
COPY (
    SELECT export_text(parcel_id) AS parcel_id, export_text(sale_id) AS sale_id, export_text(segment) AS segment,
           code AS "check", feature, export_text(value) AS value, export_text(problem) AS problem
    FROM check_rows
    ORDER BY segment, parcel_id, code, feature NULLS FIRST, sale_id NULLS FIRST, problem
) TO $path (HEADER, DELIMITER ',');
