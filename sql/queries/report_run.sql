-- One run's header. $1 run id.
SELECT run_id, created_at, config_sha256, data_sha256, seed, folds, settings FROM runs WHERE run_id = $1;
