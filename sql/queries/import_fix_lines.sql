-- Give the staged cells of a CSV file their physical line numbers, from import_line_map (row, line): the
-- line where data row `row` (1-based) starts, found by reval.data.csv_scan. $file.
UPDATE raw_cells SET line = m.line
FROM import_line_map m
WHERE raw_cells.file = $file AND raw_cells.line = m.row + 1;
