-- Staging for one import: temporary tables, never persisted, dropped with the connection.
CREATE OR REPLACE TEMP TABLE raw_cells (file VARCHAR, line BIGINT, col VARCHAR, val VARCHAR);
CREATE OR REPLACE TEMP TABLE import_roles (
    file VARCHAR, col VARCHAR, role VARCHAR, name VARCHAR, kind VARCHAR, position SMALLINT,
    levels VARCHAR[], lo DOUBLE, hi DOUBLE, log BOOLEAN
);
