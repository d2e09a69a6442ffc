-- How every segment's model was made in a run. $1 run id.
SELECT segment, market_area, kind, reason, n_sales, edf_deviation, borrowed_share, interactions
FROM segment_models WHERE run_id = $1 ORDER BY segment;
