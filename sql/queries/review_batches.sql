-- The batch to review per segment: its current batch (the view current_batches: open, else certified).
-- $segment (NULL = every segment).
SELECT batch_id, segment, run_id, state, note
FROM current_batches
WHERE $segment::VARCHAR IS NULL OR segment = $segment::VARCHAR
ORDER BY segment;
