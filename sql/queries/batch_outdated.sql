-- A segment's outdated batches that still count, oldest first. $1 segment.
SELECT batch_id, state, run_id FROM batches
WHERE segment = $1 AND state IN ('staged', 'held', 'approved', 'exported') AND outdated_at IS NOT NULL
ORDER BY batch_id;
