-- The stored segment study the app shows: the out-of-fold one of run $1 when stored, else the one of
-- prior roll values (no row when neither is stored).
SELECT study_id, values_source, run_id, confidence, judged_sha256
FROM studies
WHERE grouping = 'segment'
  AND (values_source = 'prior' OR (values_source = 'model_out_of_fold' AND run_id = $1))
ORDER BY values_source = 'model_out_of_fold' DESC
LIMIT 1;
