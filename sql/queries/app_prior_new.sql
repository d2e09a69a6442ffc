-- Prior value and the run's new market value of up to $3 parcels of segment $2 (a fixed pseudo-random sample
-- by parcel id, so the scatter reads alike every time). $1 run id.
SELECT p.prior_value AS prior, e.market_value AS value
FROM parcel_estimates e JOIN parcels p ON p.parcel_id = e.parcel_id
WHERE e.run_id = $1 AND e.segment = $2 AND p.prior_value > 0
ORDER BY hash(p.parcel_id), p.parcel_id
LIMIT $3;
