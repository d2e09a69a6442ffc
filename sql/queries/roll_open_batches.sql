-- Open (staged or held) batches of the segments about to be staged (registered frame roll_stage_segments).
SELECT batch_id, segment, state, run_id
FROM batches
WHERE state IN ('staged', 'held') AND segment IN (SELECT segment FROM roll_stage_segments)
ORDER BY segment;
