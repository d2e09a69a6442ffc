-- Where the segment's parcels lie along each curve's grid: counts in $3 equal bins of the grid's range
-- (parcels outside the grid are not counted). $1 run id, $2 segment, $3 number of bins.
WITH grid AS (
    SELECT feature, min(x) AS lo, max(x) AS hi
    FROM model_curves WHERE run_id = $1 AND segment = $2
    GROUP BY feature
),
vals AS (
    SELECT f.name AS feature, v.value
    FROM parcels p
    JOIN feature_values v ON v.parcel_id = p.parcel_id
    JOIN features f ON f.position = v.position
    WHERE p.segment = $2 AND v.value IS NOT NULL
)
SELECT vals.feature,
       least(CAST(floor((vals.value - grid.lo) / (grid.hi - grid.lo) * $3) AS INTEGER), $3 - 1) AS bin,
       count(*) AS n
FROM vals JOIN grid USING (feature)
WHERE grid.hi > grid.lo AND vals.value BETWEEN grid.lo AND grid.hi
GROUP BY ALL
ORDER BY 1, 2;
