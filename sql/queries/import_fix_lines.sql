-- Give the staged rows of a CSV file their physical line numbers, from import_line_map (row, line): the line
-- where data row `row` (1-based) starts, found by reval.data.csv_scan. $file.
UPDATE import_raw SET line = m.line
FROM import_line_map m
WHERE import_raw.file = $file AND import_raw.line = m.row + 1;
