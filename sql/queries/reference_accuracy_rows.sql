-- A run's accuracy table: per model, the whole jurisdiction first, then each segment. $1 run id.
SELECT model, segment, n, rmse_log, median_ratio, cod, prd, prb, seconds
FROM reference_accuracy WHERE run_id = $1
ORDER BY model, segment <> '(all)', segment;
