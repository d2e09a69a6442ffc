-- Histogram of every parcel's value change (a run's market value / prior value - 1), sold and unsold parcels
-- apart, in $2 equal bins between the 1st and 99th percentiles (the end bins also hold what lies beyond): a
-- million parcels become a few hundred rows. "Sold" = the parcel has a qualified sale. $1 run id.
WITH change AS (
    SELECT e.market_value / p.prior_value - 1 AS change,
           e.parcel_id IN (SELECT q.parcel_id FROM sale_qualification q WHERE q.qualified) AS sold
    FROM parcel_estimates e JOIN parcels p USING (parcel_id)
    WHERE e.run_id = $1 AND p.prior_value > 0
),
bounds AS (
    SELECT quantile_cont(change, 0.01) AS lo, quantile_cont(change, 0.99) AS hi FROM change
)
SELECT greatest(least(CAST(floor((c.change - b.lo) / greatest(b.hi - b.lo, 1e-9) * $2) AS INTEGER), $2 - 1), 0)
           AS bin,
       c.sold, count(*) AS n, any_value(b.lo) AS lo, any_value(b.hi) AS hi
FROM change c CROSS JOIN bounds b
GROUP BY ALL
ORDER BY bin, sold;
