-- Problems of single feature values: blank (missing), outside the range reval.toml declares now
-- (beyond_range; the import refused such values, so this finds what a changed range would refuse next), and
-- beyond what the segment's sold parcels (check_sold) show (beyond_sold): for a continuous or ordinal feature
-- below the smallest or above the largest sold value, for a categorical or yes/no feature a level no sold
-- parcel of the segment has. A segment without sold parcels is left to its parent and not listed here.
-- $range_names, $range_lo, $range_hi: the declared ranges by feature name; $fills: by feature position, the
-- typical value among the sold parcels (NULL: none); $segment: only this segment (NULL: all).
INSERT INTO check_rows
WITH sold_range AS (
    SELECT p.segment, v.position, min(v.value) AS lo, max(v.value) AS hi, list(DISTINCT v.value) AS seen,
           count(*) AS n
    FROM feature_values v JOIN check_sold USING (parcel_id) JOIN parcels p USING (parcel_id)
    WHERE v.value IS NOT NULL AND ($segment IS NULL OR p.segment = $segment)
    GROUP BY ALL
),
declared AS (
    SELECT unnest($range_names::VARCHAR[]) AS name, unnest($range_lo::DOUBLE[]) AS lo,
           unnest($range_hi::DOUBLE[]) AS hi
),
cells AS MATERIALIZED (   -- only the values with a problem
    SELECT p.segment, v.parcel_id, v.value, f.name, f.kind, f.levels, d.lo AS range_lo, d.hi AS range_hi,
           r.lo AS sold_lo, r.hi AS sold_hi, r.seen, r.n AS n_sold, ($fills::DOUBLE[])[f.position + 1] AS fill
    FROM feature_values v
    JOIN parcels p USING (parcel_id)
    JOIN features f USING (position)
    LEFT JOIN declared d ON d.name = f.name
    LEFT JOIN sold_range r ON r.segment = p.segment AND r.position = v.position
    WHERE ($segment IS NULL OR p.segment = $segment)
      AND (v.value IS NULL OR v.value < d.lo OR v.value > d.hi OR v.value < r.lo OR v.value > r.hi
           OR (f.kind IN ('categorical', 'binary') AND NOT list_contains(r.seen, v.value)))
)
SELECT segment, parcel_id, NULL, 'missing', name, NULL,
       'blank: the model fills in a typical value'
       || coalesce(' (among the sold parcels: ' || check_value(kind, levels, fill) || ')', '')
       || '; if the parcel has this feature, record it'
FROM cells WHERE value IS NULL
UNION ALL
SELECT segment, parcel_id, NULL, 'beyond_range', name, check_value(kind, levels, value),
       'outside the range ' || check_number(range_lo) || ' to ' || check_number(range_hi)
       || ' that reval.toml declares: the next import refuses it'
FROM cells WHERE kind = 'continuous' AND (value < range_lo OR value > range_hi)
UNION ALL
SELECT segment, parcel_id, NULL, 'beyond_sold', name, check_value(kind, levels, value),
       CASE WHEN kind IN ('continuous', 'ordinal')
            THEN CASE WHEN value < sold_lo THEN 'below the lowest' ELSE 'above the highest' END
                 || ' value among the segment''s ' || n_sold || ' sold parcels with it ('
                 || check_value(kind, levels, CASE WHEN value < sold_lo THEN sold_lo ELSE sold_hi END)
                 || '): the segment''s own sales say nothing about it, so its value rests on the edge of the '
                 || 'curve and the parent''s sales'
            ELSE 'no sold parcel of the segment has this level: its effect comes from the parent''s sales' END
FROM cells
WHERE value IS NOT NULL AND n_sold IS NOT NULL
  AND ((kind IN ('continuous', 'ordinal') AND (value < sold_lo OR value > sold_hi))
       OR (kind IN ('categorical', 'binary') AND NOT list_contains(seen, value)));
