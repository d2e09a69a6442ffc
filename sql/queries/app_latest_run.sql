-- The latest model run, if any.
SELECT run_id, created_at FROM runs ORDER BY created_at DESC, run_id DESC LIMIT 1;
