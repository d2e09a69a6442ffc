-- Stage the mapped columns of a CSV file as text cells, trimmed (import_trim). Line = row number + 1 (line 1
-- is the header); import_fix_lines moves rows after a quoted line break or a blank line to their physical
-- line. The dialect is fixed (comma, double quote, doubled quote inside quotes): reval.data.csv_scan has
-- checked the file against it. $1: file key, $2: path, $3: mapped column names.
INSERT INTO raw_cells
SELECT $1, line, col, nullif(import_trim(val), '')
FROM (
    UNPIVOT (
        SELECT row_number() OVER () + 1 AS line, coalesce(COLUMNS(*), '')
        FROM read_csv($2, all_varchar = true, header = true, delim = ',', quote = '"', escape = '"')
    ) ON COLUMNS(* EXCLUDE line) INTO NAME col VALUE val
)
WHERE col IN (SELECT unnest($3::VARCHAR[]));
