-- Every model's out-of-fold accuracy (ours included) on the same sales, none trimmed, for a segment and overall.
-- $1 run id, $2 segment.
SELECT model, segment, n, rmse_log, median_ratio, cod, prd, prb, seconds
FROM reference_accuracy
WHERE run_id = $1 AND segment IN ($2, '(all)')
ORDER BY segment = '(all)', model;
