-- A run's stored model. $1 run id.
SELECT format, model FROM run_models WHERE run_id = $1;
