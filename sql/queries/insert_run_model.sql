-- Store a run's fitted model. $1 run id, $2 format, $3 model bytes.
INSERT INTO run_models VALUES ($1, $2, $3);
