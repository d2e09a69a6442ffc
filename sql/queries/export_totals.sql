-- Rows and value totals per segment of the batches being exported, for the manifest. $batch_ids.
SELECT b.segment, b.batch_id, b.run_id, b.state, b.basis_sha256, count(*) AS rows,
       sum(v.prior_value) AS prior_market_value, sum(v.prior_assessed_value) AS prior_assessed_value,
       sum(v.market_value) AS market_value, sum(v.land_value) AS land_value,
       sum(v.improvement_value) AS improvement_value, sum(v.assessed_value) AS assessed_value,
       sum(v.assessed_land_value) AS assessed_land_value, sum(v.assessed_improvement_value) AS assessed_improvement_value
FROM roll_values v JOIN batches b ON b.batch_id = v.batch_id
WHERE list_contains($batch_ids::BIGINT[], v.batch_id)
GROUP BY ALL
ORDER BY b.segment;
