-- Staging for one import: temporary tables, never persisted, dropped with the connection.
-- import_trim removes surrounding white space from every cell: spaces, tabs, line breaks, no-break spaces
-- and stray byte-order marks, so an id written as " 00101" or with a leading tab is the parcel 00101.
CREATE OR REPLACE TEMP TABLE raw_cells (file VARCHAR, line BIGINT, col VARCHAR, val VARCHAR);
CREATE OR REPLACE TEMP TABLE import_roles (
    file VARCHAR, col VARCHAR, role VARCHAR, name VARCHAR, kind VARCHAR, position SMALLINT,
    levels VARCHAR[], lo DOUBLE, hi DOUBLE, log BOOLEAN, missing VARCHAR[]
);
-- (trimming with a set of characters costs four times a plain trim: only cells with white space at an edge pay it)
CREATE OR REPLACE TEMP MACRO import_space(c) AS c IN (' ', chr(9), chr(10), chr(11), chr(12), chr(13), chr(160), chr(65279));
CREATE OR REPLACE TEMP MACRO import_trim(x) AS
    CASE WHEN import_space(left(x, 1)) OR import_space(right(x, 1))
         THEN trim(x, ' ' || chr(9) || chr(10) || chr(11) || chr(12) || chr(13) || chr(160) || chr(65279)) ELSE x END;
