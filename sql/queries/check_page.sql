-- One page of the check rows that pass the filters ($segment, $code: NULL = any), sorted by $sort
-- ('segment', 'code', 'parcel' or 'feature'; then by segment, parcel, check, feature, sale), $limit rows
-- from $offset.
SELECT segment, parcel_id, sale_id, code, feature, value, problem
FROM check_rows
WHERE ($segment IS NULL OR segment = $segment) AND ($code IS NULL OR code = $code)
ORDER BY CASE $sort WHEN 'code' THEN code WHEN 'parcel' THEN parcel_id WHEN 'feature' THEN feature
                    ELSE segment END NULLS LAST,
         segment, parcel_id, code, feature NULLS FIRST, sale_id NULLS FIRST, problem
LIMIT $limit OFFSET $offset;
