-- Every problem in the staged input, one row each. $today, $date_format (NULL = ISO dates), $latest_date (the valuation date plus a year),
-- $max_amount (the largest price or prior value, [files] max_amount).
-- Each cell's own checks are one pass over import_cells (the reasons that apply, empty for a good cell);
-- num is set only on cells that must be numbers (so checks on num apply only to them) and day only on sale dates.
-- The checks across rows read the typed rows (import_rows).
WITH typed AS (
    SELECT file, line, col, role, kind, levels, lo, hi, log, val, is_parcel_cell, is_sale_cell, required, numeric,
           CASE WHEN numeric THEN import_num(val) END AS num,
           CASE WHEN is_sale_cell AND kind = 'date' THEN import_day(val, $date_format) END AS day
    FROM import_cells
    WHERE is_parcel_cell OR is_sale_cell
),
cell_reasons AS (
    SELECT file, line, col, val, concat_ws(chr(31),   -- the reasons that apply, one separator (31, unit separator) apart
        -- required values
        CASE WHEN required AND val IS NULL THEN 'missing ' || replace(role, '_', ' ') END,
        -- numbers
        CASE WHEN numeric AND val IS NOT NULL AND num IS NULL THEN 'not a number' END,
        CASE WHEN numeric AND NOT isfinite(num) THEN 'not a finite number (NaN and infinity are not values)' END,
        CASE WHEN isfinite(num) AND abs(num) > $max_amount AND kind IN ('amount', 'price')
             THEN 'beyond the largest amount accepted, ' || $max_amount::VARCHAR || ' ([files] max_amount in reval.toml)' END,
        CASE WHEN kind = 'price' AND num <= 0 THEN 'sale price must be positive' END,
        CASE WHEN kind = 'amount' AND num < 0 THEN 'prior value cannot be negative' END,
        CASE WHEN kind = 'latitude' AND isfinite(num) AND abs(num) > 90 THEN 'latitude must be between -90 and 90' END,
        CASE WHEN kind = 'longitude' AND isfinite(num) AND abs(num) > 180 THEN 'longitude must be between -180 and 180' END,
        CASE WHEN kind = 'continuous' AND isfinite(num) AND (num < lo OR num > hi)
             THEN 'outside the declared range ' || lo::VARCHAR || ' to ' || hi::VARCHAR END,
        CASE WHEN kind = 'continuous' AND log AND isfinite(num) AND num <= 0
             THEN 'a log-transformed feature needs a positive value' END,
        CASE WHEN is_parcel_cell AND (kind = 'ordinal' OR kind = 'categorical') AND val IS NOT NULL
                  AND list_position(levels, val) IS NULL
             THEN 'unknown level (expected one of: ' || array_to_string(levels, ', ') || ')' END,
        CASE WHEN is_parcel_cell AND kind = 'binary' AND val IS NOT NULL
                  AND lower(val) NOT IN ('0', '1', 'true', 'false', 'yes', 'no', 'y', 'n', 't', 'f')
             THEN 'not a yes/no value (expected 0/1, true/false or yes/no)' END,
        -- dates
        CASE WHEN kind = 'date' AND val IS NOT NULL AND day IS NULL AND is_sale_cell
             THEN 'not a date' || CASE WHEN $date_format IS NULL THEN ' (expected YYYY-MM-DD)'
                                       ELSE ' (expected ' || $date_format || ')' END END,
        CASE WHEN day < DATE '1800-01-01' OR day > $latest_date::DATE
             THEN 'sale date outside 1800-01-01 to ' || $latest_date::DATE::VARCHAR || ' (the valuation date plus a year)' END,
        CASE WHEN day > $today::DATE AND day <= $latest_date::DATE THEN 'sale date is in the future' END
    ) AS reasons
    FROM typed
),
parcel_rows AS (SELECT * FROM import_rows WHERE is_parcel_row),
sale_rows AS (SELECT * REPLACE (import_day(sale_date, $date_format) AS sale_date) FROM import_rows WHERE is_sale_row),
problems AS (
    SELECT file, line, col, val, unnest(string_split(reasons, chr(31))) AS reason FROM cell_reasons WHERE reasons <> ''
    UNION ALL
    -- parcel ids unique (grouped, not windowed: a million ids group faster than they sort)
    SELECT p.file, p.line, o.col, p.parcel_id, 'duplicate parcel id (first on line ' || d.first_line::VARCHAR || ')'
    FROM parcel_rows p
    JOIN (SELECT parcel_id, min(line) AS first_line FROM parcel_rows WHERE parcel_id IS NOT NULL
          GROUP BY parcel_id HAVING count(*) > 1) d ON d.parcel_id = p.parcel_id AND p.line > d.first_line
    JOIN import_roles o ON o.file = p.file AND o.role = 'parcel_id'
    UNION ALL
    -- a segment belongs to one market area
    SELECT p.file, p.line, o.col, p.market_area,
           'segment ' || p.segment || ' is in more than one market area (' || a.areas || ')'
    FROM parcel_rows p
    JOIN (SELECT segment, string_agg(DISTINCT market_area, ', ' ORDER BY market_area) AS areas
          FROM parcel_rows WHERE market_area IS NOT NULL
          GROUP BY segment HAVING count(DISTINCT market_area) > 1) a ON a.segment = p.segment
    JOIN import_roles o ON o.file = p.file AND o.role = 'market_area'
    UNION ALL
    -- sales refer to known parcels, once each
    SELECT s.file, s.line, o.col, s.parcel_id, 'sale of a parcel that is not in the parcels file'
    FROM sale_rows s JOIN import_roles o ON o.file = s.file AND o.role = 'parcel_id'
    WHERE s.parcel_id IS NOT NULL
      AND NOT EXISTS (SELECT 1 FROM parcel_rows p WHERE p.parcel_id = s.parcel_id)
    UNION ALL
    SELECT s.file, s.line, coalesce(o.col, '(line)'), s.sale_id,
           'the same sale is listed twice for this parcel (first on line ' || d.first_line::VARCHAR || ')'
    FROM sale_rows s
    JOIN (SELECT sale_id, parcel_id, min(line) AS first_line FROM sale_rows WHERE parcel_id IS NOT NULL
          GROUP BY sale_id, parcel_id HAVING count(*) > 1) d
      ON d.sale_id = s.sale_id AND d.parcel_id = s.parcel_id AND s.line > d.first_line
    LEFT JOIN import_roles o ON o.file = s.file AND o.role = 'sale_id'
    UNION ALL
    -- a multi-parcel sale has one date and one price
    SELECT s.file, s.line, coalesce(o.col, '(line)'), s.sale_id, 'multi-parcel sale whose rows disagree on price or date'
    FROM sale_rows s
    JOIN (SELECT sale_id FROM sale_rows GROUP BY sale_id
          HAVING count(DISTINCT sale_price) > 1 OR count(DISTINCT sale_date) > 1) d ON d.sale_id = s.sale_id
    LEFT JOIN import_roles o ON o.file = s.file AND o.role = 'sale_id'
)
SELECT file, line, col AS "column", val AS "value", reason FROM problems
ORDER BY file, line, "column", reason;
