-- Stage the mapped columns of a Parquet file as text cells. Line = row number + 1, as if it had a header.
-- $1: file key, $2: path, $3: mapped column names.
INSERT INTO raw_cells
SELECT $1, line, col, nullif(import_trim(val), '')
FROM (
    UNPIVOT (
        SELECT file_row_number + 2 AS line, coalesce(CAST(COLUMNS(* EXCLUDE file_row_number) AS VARCHAR), '')
        FROM read_parquet($2, file_row_number = true)
    ) ON COLUMNS(* EXCLUDE line) INTO NAME col VALUE val
)
WHERE col IN (SELECT unnest($3::VARCHAR[]));
