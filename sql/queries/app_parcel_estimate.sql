-- A parcel's estimate in a run and how its segment's model was made. $1 run id, $2 parcel id.
SELECT e.log_value, e.market_value, m.kind, m.reason
FROM parcel_estimates e
LEFT JOIN segment_models m ON m.run_id = e.run_id AND m.segment = e.segment
WHERE e.run_id = $1 AND e.parcel_id = $2;
