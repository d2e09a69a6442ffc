-- Median value change of sold and unsold parcels of a segment (a first look at sales chasing).
-- $1 run id, $2 segment.
SELECT EXISTS (SELECT 1 FROM sale_qualification q WHERE q.parcel_id = e.parcel_id AND q.qualified) AS sold,
       count(*) AS n, median(e.market_value / p.prior_value - 1) AS median_change
FROM parcel_estimates e JOIN parcels p USING (parcel_id)
WHERE e.run_id = $1 AND e.segment = $2 AND p.prior_value > 0
GROUP BY ALL ORDER BY sold;
