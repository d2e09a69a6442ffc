-- Stage the mapped columns of a CSV file as text cells. Line = row number + 1 (line 1 is the header).
-- $1: file key, $2: path, $3: mapped column names.
INSERT INTO raw_cells
SELECT $1, line, col, nullif(trim(val), '')
FROM (
    UNPIVOT (
        SELECT row_number() OVER () + 1 AS line, coalesce(COLUMNS(*), '')
        FROM read_csv($2, all_varchar = true, header = true)
    ) ON COLUMNS(* EXCLUDE line) INTO NAME col VALUE val
)
WHERE col IN (SELECT unnest($3::VARCHAR[]));
