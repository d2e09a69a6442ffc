-- The newest model run's id (none when no run exists yet).
SELECT run_id FROM runs ORDER BY created_at DESC, run_id DESC LIMIT 1;
