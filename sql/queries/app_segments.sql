-- One row per segment for the overview: counts, how its model was made, and the median value change.
-- Aggregated in the database (never one row per parcel). $1 run id (NULL when there is no run).
WITH sold AS (
    SELECT p.segment, count(*) AS sales
    FROM sale_qualification q JOIN parcels p USING (parcel_id)
    WHERE q.qualified
    GROUP BY p.segment
),
model AS (
    SELECT segment, kind, borrowed_share, reason FROM segment_models WHERE run_id = $1
),
change AS (
    SELECT e.segment, median(e.market_value / p.prior_value) - 1 AS value_change
    FROM parcel_estimates e JOIN parcels p USING (parcel_id)
    WHERE e.run_id = $1 AND p.prior_value > 0
    GROUP BY e.segment
)
SELECT s.segment, s.market_area, s.n_parcels AS parcels, coalesce(sold.sales, 0) AS sales,
       model.kind, model.borrowed_share, model.reason, change.value_change
FROM segments s
LEFT JOIN sold USING (segment)
LEFT JOIN model USING (segment)
LEFT JOIN change USING (segment)
ORDER BY s.segment;
