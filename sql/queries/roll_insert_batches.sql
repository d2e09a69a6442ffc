-- One staged batch per segment of roll_stage_segments, sized by the run's parcels. $run, $basis, $at.
INSERT INTO batches (segment, run_id, state, basis_sha256, n_parcels, created_at, changed_at)
SELECT p.segment, $run, 'staged', $basis, count(*), $at, $at
FROM parcel_estimates e JOIN parcels p ON p.parcel_id = e.parcel_id
WHERE e.run_id = $run AND p.segment IN (SELECT segment FROM roll_stage_segments)
GROUP BY p.segment
ORDER BY p.segment
RETURNING batch_id, segment, n_parcels;
