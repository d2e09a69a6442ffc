-- Histogram of a segment's value changes (new market value / prior value - 1), sold and unsold parcels
-- apart, in $3 equal bins between the 2nd and 98th percentiles (the end bins also hold what lies beyond).
-- "Sold" = the parcel has a qualified sale. $1 run id, $2 segment.
WITH change AS (
    SELECT e.market_value / p.prior_value - 1 AS change,
           EXISTS (SELECT 1 FROM sale_qualification q WHERE q.parcel_id = e.parcel_id AND q.qualified) AS sold
    FROM parcel_estimates e JOIN parcels p USING (parcel_id)
    WHERE e.run_id = $1 AND e.segment = $2 AND p.prior_value > 0
),
bounds AS (
    SELECT quantile_cont(change, 0.02) AS lo, quantile_cont(change, 0.98) AS hi FROM change
)
SELECT greatest(least(CAST(floor((c.change - b.lo) / greatest(b.hi - b.lo, 1e-9) * $3) AS INTEGER), $3 - 1), 0)
           AS bin,
       c.sold, count(*) AS n, any_value(b.lo) AS lo, any_value(b.hi) AS hi
FROM change c CROSS JOIN bounds b
GROUP BY ALL
ORDER BY bin, sold;
