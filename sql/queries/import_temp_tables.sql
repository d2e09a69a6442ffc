-- Staging for one import: temporary tables, never persisted, dropped with the connection.
-- import_raw: each data row of a file once, as the list of its mapped columns' cells (trimmed, empty = missing);
-- import_files: what each file holds (parcels, sales or both);
-- import_roles: each mapped column's role, how it is checked, and `cell`, its place in that file's list.
CREATE OR REPLACE TEMP TABLE import_raw (file VARCHAR, line BIGINT, cells VARCHAR[]);
CREATE OR REPLACE TEMP TABLE import_files (file VARCHAR, parcels BOOLEAN, sales BOOLEAN);
CREATE OR REPLACE TEMP TABLE import_roles (
    file VARCHAR, col VARCHAR, role VARCHAR, name VARCHAR, kind VARCHAR, position SMALLINT,
    levels VARCHAR[], lo DOUBLE, hi DOUBLE, log BOOLEAN, missing VARCHAR[], cell SMALLINT
);
-- import_trim removes surrounding white space from every cell: spaces, tabs, line breaks, no-break spaces
-- and stray byte-order marks, so an id written as " 00101" or with a leading tab is the parcel 00101.
-- (trimming with a set of characters costs four times a plain trim: only cells with white space at an edge pay it)
CREATE OR REPLACE TEMP MACRO import_space(c) AS c IN (' ', chr(9), chr(10), chr(11), chr(12), chr(13), chr(160), chr(65279));
CREATE OR REPLACE TEMP MACRO import_trim(x) AS
    CASE WHEN import_space(left(x, 1)) OR import_space(right(x, 1))
         THEN trim(x, ' ' || chr(9) || chr(10) || chr(11) || chr(12) || chr(13) || chr(160) || chr(65279)) ELSE x END;
CREATE OR REPLACE TEMP MACRO import_cell(x) AS nullif(import_trim(x), '');
-- How a cell reads, the one rule for the checks (import_problems) and the build (import_build): a number; an ISO
-- date (YYYY-MM-DD only: DuckDB would also read 'epoch', 'infinity' and '-2023-01-01', a date BC) or one in the
-- configured format (fmt); a yes; a feature's cell equal to one of its `missing` codes (as text, or as a number when
-- both read as numbers: 0 and 0.0) is missing.
CREATE OR REPLACE TEMP MACRO import_num(x) AS TRY_CAST(x AS DOUBLE);
CREATE OR REPLACE TEMP MACRO import_day(x, fmt) AS
    CASE WHEN fmt IS NOT NULL THEN CAST(try_strptime(x, fmt) AS DATE)
         WHEN regexp_full_match(x, '\d{4}-\d{1,2}-\d{1,2}') THEN TRY_CAST(x AS DATE) END;
CREATE OR REPLACE TEMP MACRO import_yes(x) AS lower(x) IN ('1', 'true', 'yes', 'y', 't');
CREATE OR REPLACE TEMP MACRO import_known(x, missing) AS
    CASE WHEN len(missing) > 0
              AND list_bool_or(list_transform(missing, lambda m: m = x OR TRY_CAST(m AS DOUBLE) = TRY_CAST(x AS DOUBLE)))
         THEN NULL ELSE x END;
