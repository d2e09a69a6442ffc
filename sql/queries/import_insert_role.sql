-- One mapped column of an input file (reval.data.importer.Role): file key, column, role, name, kind, position,
-- levels, lo, hi, log, missing codes, cell.
INSERT INTO import_roles VALUES ($1, $2, $3, $4, $5, $6, $7, $8, $9, $10, $11, $12);
