-- Stage a Parquet file's rows as text cells, trimmed, as import_stage_csv does. Line = row number + 1, as if it had a
-- header. $1: file key, $2: path, $3: the mapped column names (in the file's order, the order of import_roles.cell).
INSERT INTO import_raw
SELECT $1, file_row_number + 2, [*COLUMNS(* EXCLUDE file_row_number)]
FROM (SELECT file_row_number, import_cell(CAST(COLUMNS($3) AS VARCHAR)) FROM read_parquet($2, file_row_number = true));
