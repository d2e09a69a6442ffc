-- Stage one parcel's corrected cells as the import stages a file's (raw_cells, import_roles: see
-- import_temp_tables.sql), so import_cells and import_problems check them exactly like imported cells. Cells are
-- trimmed like imported ones; empty means missing. Reads the registered frames correct_cells (col, val) and
-- correct_roles (the import_roles columns). $file.
INSERT INTO import_roles SELECT * FROM correct_roles;
INSERT INTO raw_cells SELECT $file, 2, col, nullif(import_trim(val), '') FROM correct_cells;
