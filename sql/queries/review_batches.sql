-- The batch to review per segment: its open (staged or held) batch, else its certified one.
-- $segment (NULL = every segment).
SELECT batch_id, segment, run_id, state, note
FROM (SELECT *, row_number() OVER (PARTITION BY segment
                                   ORDER BY state IN ('staged', 'held') DESC, state = 'approved' DESC,
                                            approved_at DESC NULLS LAST, batch_id DESC) AS k
      FROM batches WHERE state IN ('staged', 'held', 'approved', 'exported'))
WHERE k = 1 AND ($segment::VARCHAR IS NULL OR segment = $segment::VARCHAR)
ORDER BY segment;
