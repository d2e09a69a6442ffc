-- How one segment's model was made in a run. $1 run id, $2 segment.
SELECT kind, reason, n_sales, edf_deviation, borrowed_share, interactions
FROM segment_models WHERE run_id = $1 AND segment = $2;
