-- How far the project's job has come, in one row: imported parcels and sales, prepared sales, stored studies
-- (prior values; out-of-fold of the latest run), runs, live batches by state and exported batches.
WITH latest AS (SELECT run_id FROM runs ORDER BY created_at DESC, run_id DESC LIMIT 1)
SELECT (SELECT count(*) FROM parcels) AS parcels,
       (SELECT count(*) FROM sales) AS sales,
       (SELECT count(*) FILTER (WHERE qualified) FROM sale_qualification) AS qualified,
       (SELECT count(*) FILTER (WHERE NOT qualified) FROM sale_qualification) AS excluded,
       (SELECT count(*) FROM studies WHERE values_source = 'prior' AND grouping = 'segment') AS prior_studies,
       (SELECT count(*) FROM studies WHERE values_source = 'model_out_of_fold' AND grouping = 'segment'
                                      AND run_id = (SELECT run_id FROM latest)) AS model_studies,
       (SELECT count(*) FROM runs) AS runs,
       (SELECT run_id FROM latest) AS run_id,
       (SELECT count(*) FROM batches WHERE state = 'staged') AS staged,
       (SELECT count(*) FROM batches WHERE state = 'held') AS held,
       (SELECT count(*) FROM batches WHERE state = 'approved') AS approved,
       (SELECT count(*) FROM batches WHERE state = 'exported') AS exported;
