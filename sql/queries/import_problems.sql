-- Every problem in the staged input, one row each. $today, $date_format (NULL = ISO dates), $latest_date (the
-- valuation date plus a year), $max_amount (the largest price or prior value, [files] max_amount).
WITH parcel_ids AS (
    SELECT file, line, val AS parcel_id FROM import_cells WHERE is_parcel_cell AND role = 'parcel_id'
),
sale_keys AS (
    SELECT file, line,
           max(val) FILTER (WHERE role = 'parcel_id') AS parcel_id,
           coalesce(max(val) FILTER (WHERE role = 'sale_id'), 'line ' || line) AS sale_id,
           max(num) FILTER (WHERE role = 'sale_price') AS price,
           max(day) FILTER (WHERE role = 'sale_date') AS day
    FROM import_cells WHERE is_sale_cell GROUP BY file, line
),
problems AS (
    -- required values
    SELECT file, line, col, val, 'missing ' || replace(role, '_', ' ') AS reason
    FROM import_cells
    WHERE val IS NULL AND (
        (is_parcel_cell AND role IN ('parcel_id', 'segment', 'market_area', 'property_class'))
        OR (is_sale_cell AND role IN ('parcel_id', 'sale_date', 'sale_price', 'sale_id')))
    UNION ALL
    -- numbers
    SELECT file, line, col, val, 'not a number'
    FROM import_cells
    WHERE val IS NOT NULL AND num IS NULL
      AND ((is_parcel_cell AND kind IN ('amount', 'latitude', 'longitude', 'continuous'))
           OR (is_sale_cell AND kind = 'price'))
    UNION ALL
    SELECT file, line, col, val, 'not a finite number (NaN and infinity are not values)'
    FROM import_cells
    WHERE NOT isfinite(num)
      AND ((is_parcel_cell AND kind IN ('amount', 'latitude', 'longitude', 'continuous'))
           OR (is_sale_cell AND kind = 'price'))
    UNION ALL
    SELECT file, line, col, val, 'beyond the largest amount accepted, ' || $max_amount::VARCHAR
                                 || ' ([files] max_amount in reval.toml)'
    FROM import_cells
    WHERE isfinite(num) AND abs(num) > $max_amount
      AND ((is_parcel_cell AND kind = 'amount') OR (is_sale_cell AND kind = 'price'))
    UNION ALL
    SELECT file, line, col, val, 'sale price must be positive'
    FROM import_cells WHERE is_sale_cell AND kind = 'price' AND num <= 0
    UNION ALL
    SELECT file, line, col, val, 'prior value cannot be negative'
    FROM import_cells WHERE is_parcel_cell AND kind = 'amount' AND num < 0
    UNION ALL
    SELECT file, line, col, val, 'latitude must be between -90 and 90'
    FROM import_cells WHERE is_parcel_cell AND kind = 'latitude' AND isfinite(num) AND abs(num) > 90
    UNION ALL
    SELECT file, line, col, val, 'longitude must be between -180 and 180'
    FROM import_cells WHERE is_parcel_cell AND kind = 'longitude' AND isfinite(num) AND abs(num) > 180
    UNION ALL
    SELECT file, line, col, val,
           'outside the declared range ' || lo::VARCHAR || ' to ' || hi::VARCHAR
    FROM import_cells WHERE is_parcel_cell AND kind = 'continuous' AND isfinite(num) AND (num < lo OR num > hi)
    UNION ALL
    SELECT file, line, col, val, 'a log-transformed feature needs a positive value'
    FROM import_cells WHERE is_parcel_cell AND kind = 'continuous' AND log AND isfinite(num) AND num <= 0
    UNION ALL
    SELECT file, line, col, val, 'unknown level (expected one of: ' || array_to_string(levels, ', ') || ')'
    FROM import_cells
    WHERE is_parcel_cell AND kind IN ('ordinal', 'categorical') AND val IS NOT NULL
      AND list_position(levels, val) IS NULL
    UNION ALL
    SELECT file, line, col, val, 'not a yes/no value (expected 0/1, true/false or yes/no)'
    FROM import_cells
    WHERE is_parcel_cell AND kind = 'binary' AND val IS NOT NULL
      AND lower(val) NOT IN ('0', '1', 'true', 'false', 'yes', 'no', 'y', 'n', 't', 'f')
    UNION ALL
    -- dates
    SELECT file, line, col, val, 'not a date' || CASE WHEN $date_format IS NULL THEN ' (expected YYYY-MM-DD)'
                                                      ELSE ' (expected ' || $date_format || ')' END
    FROM import_cells WHERE is_sale_cell AND kind = 'date' AND val IS NOT NULL AND day IS NULL
    UNION ALL
    SELECT file, line, col, val, 'sale date outside 1800-01-01 to ' || $latest_date::DATE::VARCHAR
                                 || ' (the valuation date plus a year)'
    FROM import_cells
    WHERE is_sale_cell AND kind = 'date' AND (day < DATE '1800-01-01' OR day > $latest_date::DATE)
    UNION ALL
    SELECT file, line, col, val, 'sale date is in the future'
    FROM import_cells WHERE is_sale_cell AND kind = 'date' AND day > $today::DATE AND day <= $latest_date::DATE
    UNION ALL
    -- parcel ids unique
    SELECT p.file, p.line, r.col, p.parcel_id,
           'duplicate parcel id (first on line ' || first_line::VARCHAR || ')'
    FROM (SELECT *, min(line) OVER (PARTITION BY parcel_id) AS first_line FROM parcel_ids
          WHERE parcel_id IS NOT NULL) p
    JOIN import_roles r ON r.file = p.file AND r.role = 'parcel_id'
    WHERE p.line > p.first_line
    UNION ALL
    -- a segment belongs to one market area
    SELECT c.file, c.line, c.col, c.val,
           'segment ' || s.val || ' is in more than one market area (' || a.areas || ')'
    FROM import_cells c
    JOIN import_cells s ON s.file = c.file AND s.line = c.line AND s.role = 'segment' AND s.is_parcel_cell
    JOIN (SELECT s2.val AS segment, string_agg(DISTINCT m2.val, ', ' ORDER BY m2.val) AS areas
          FROM import_cells s2
          JOIN import_cells m2 ON m2.file = s2.file AND m2.line = s2.line AND m2.role = 'market_area'
          WHERE s2.role = 'segment' AND s2.is_parcel_cell AND m2.val IS NOT NULL
          GROUP BY s2.val HAVING count(DISTINCT m2.val) > 1) a ON a.segment = s.val
    WHERE c.role = 'market_area' AND c.is_parcel_cell
    UNION ALL
    -- sales refer to known parcels, once each
    SELECT k.file, k.line, r.col, k.parcel_id, 'sale of a parcel that is not in the parcels file'
    FROM sale_keys k JOIN import_roles r ON r.file = k.file AND r.role = 'parcel_id'
    WHERE k.parcel_id IS NOT NULL AND k.parcel_id NOT IN (SELECT parcel_id FROM parcel_ids WHERE parcel_id IS NOT NULL)
    UNION ALL
    SELECT k.file, k.line, coalesce(r.col, '(line)'), k.sale_id,
           'the same sale is listed twice for this parcel (first on line ' || first_line::VARCHAR || ')'
    FROM (SELECT *, min(line) OVER (PARTITION BY sale_id, parcel_id) AS first_line FROM sale_keys) k
    LEFT JOIN import_roles r ON r.file = k.file AND r.role = 'sale_id'
    WHERE k.line > k.first_line AND k.parcel_id IS NOT NULL
    UNION ALL
    -- a multi-parcel sale has one date and one price
    SELECT k.file, k.line, coalesce(r.col, '(line)'), k.sale_id,
           'multi-parcel sale whose rows disagree on price or date'
    FROM (SELECT *, count(DISTINCT price) OVER (PARTITION BY sale_id) AS n_prices,
                    count(DISTINCT day) OVER (PARTITION BY sale_id) AS n_days FROM sale_keys) k
    LEFT JOIN import_roles r ON r.file = k.file AND r.role = 'sale_id'
    WHERE k.n_prices > 1 OR k.n_days > 1
)
SELECT file, line, col AS "column", val AS "value", reason FROM problems
ORDER BY file, line, "column", reason;
