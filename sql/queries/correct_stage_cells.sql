-- Stage one parcel's corrected cells as the import stages a file's row (import_raw, see import_temp_tables.sql), so
-- import_cells and import_problems check them exactly like imported cells. Cells are trimmed like imported ones; empty
-- means missing. $file, $cells: the parcel id, then each corrected feature's text in the order of import_roles.cell.
INSERT INTO import_raw SELECT $file, 2, list_transform($cells::VARCHAR[], lambda v: import_cell(v));
