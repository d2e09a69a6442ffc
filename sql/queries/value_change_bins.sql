-- Histogram of parcels' value changes (a run's market value / prior value - 1), sold and unsold parcels apart,
-- in $3 equal bins between the $4 and 1 - $4 quantiles (the end bins also hold what lies beyond): a million
-- parcels become a few hundred rows. "Sold" = the parcel has a qualified sale. Used by the app's value-change
-- tab (one segment) and the ratio-study report (every parcel). $1 run id, $2 segment (NULL: all), $3 bins,
-- $4 tail share left to the end bins.
WITH change AS (
    SELECT e.market_value / p.prior_value - 1 AS change,
           e.parcel_id IN (SELECT q.parcel_id FROM sale_qualification q WHERE q.qualified) AS sold
    FROM parcel_estimates e JOIN parcels p USING (parcel_id)
    WHERE e.run_id = $1 AND ($2 IS NULL OR e.segment = $2) AND p.prior_value > 0
),
bounds AS (
    SELECT quantile_cont(change, $4) AS lo, quantile_cont(change, 1 - $4) AS hi FROM change
)
SELECT greatest(least(CAST(floor((c.change - b.lo) / greatest(b.hi - b.lo, 1e-9) * $3) AS INTEGER), $3 - 1), 0)
           AS bin,
       c.sold, count(*) AS n, any_value(b.lo) AS lo, any_value(b.hi) AS hi
FROM change c CROSS JOIN bounds b
GROUP BY ALL
ORDER BY bin, sold;
