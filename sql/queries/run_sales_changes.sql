-- Segments whose qualified sales (or the analyst's decisions on them) differ from those a run was fitted on,
-- with the number of sales then and now. Needs fingerprint_macros. $run.
SELECT coalesce(now.segment, r.segment) AS segment, coalesce(r.n_sales, 0) AS n_then,
       coalesce(now.n_sales, 0) AS n_now
FROM sales_fingerprints() now
FULL OUTER JOIN (SELECT * FROM run_sales_fingerprints WHERE run_id = $run) r ON r.segment = now.segment
WHERE r.data_md5 IS DISTINCT FROM now.data_md5
ORDER BY segment;
