-- Every batch that still counts (not replaced or superseded), newest first within each segment.
SELECT batch_id, segment, run_id, state, n_parcels, created_at, changed_at, approved_at, note, judged_sha256,
       outdated_at
FROM batches
WHERE state IN ('staged', 'held', 'approved', 'exported')
ORDER BY segment, batch_id DESC;
