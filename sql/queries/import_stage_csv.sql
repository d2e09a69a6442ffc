-- Stage a CSV file's data rows, read once: each row's mapped cells as one list, empty = missing, trimmed (import_cell)
-- when the scan found white space beside a separator ($4; trimming every cell of a large file costs seconds). Line =
-- row number + 1 (line 1 is the header); import_fix_lines moves rows after a quoted line break or a blank line to
-- their physical line. The dialect is fixed (comma, double quote, doubled quote inside quotes): reval.data.csv_scan
-- has checked the file against it. $1: file key, $2: path, $3: the mapped column names (COLUMNS keeps the file's
-- order, the order of import_roles.cell), $4: trim.
INSERT INTO import_raw
SELECT $1, row_number() OVER () + 1, [*COLUMNS(*)]
FROM (SELECT CASE WHEN $4 THEN import_cell(COLUMNS($3)) ELSE nullif(COLUMNS($3), '') END
      FROM read_csv($2, all_varchar = true, header = true, delim = ',', quote = '"', escape = '"'));
