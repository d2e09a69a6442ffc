-- Each run's number in order of creation (run 1 is the oldest): a short name for screens.
SELECT run_id, row_number() OVER (ORDER BY created_at, run_id) AS number FROM runs;
