-- Where the segment's parcels lie along each curve's grid. Continuous features: counts in $3 equal bins
-- of the grid's range (parcels outside the grid are not counted); other features: counts per level code.
-- $1 run id, $2 segment, $3 number of bins.
WITH grid AS (
    SELECT feature, min(x) AS lo, max(x) AS hi
    FROM model_curves WHERE run_id = $1 AND segment = $2
    GROUP BY feature
),
vals AS (
    SELECT f.name AS feature, f.kind, v.value
    FROM parcels p
    JOIN feature_values v ON v.parcel_id = p.parcel_id
    JOIN features f ON f.position = v.position
    WHERE p.segment = $2 AND v.value IS NOT NULL
)
SELECT vals.feature,
       CASE WHEN vals.kind = 'continuous'
            THEN least(CAST(floor((vals.value - grid.lo) / (grid.hi - grid.lo) * $3) AS INTEGER), $3 - 1)
            ELSE CAST(vals.value AS INTEGER) END AS bin,
       count(*) AS n
FROM vals JOIN grid USING (feature)
WHERE vals.kind <> 'continuous' OR (grid.hi > grid.lo AND vals.value BETWEEN grid.lo AND grid.hi)
GROUP BY ALL
ORDER BY 1, 2;
