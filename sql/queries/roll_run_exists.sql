-- 1 when the run exists. $1 run id.
SELECT count(*) FROM runs WHERE run_id = $1;
