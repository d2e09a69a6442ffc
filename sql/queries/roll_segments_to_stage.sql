-- Of the chosen segments ($segments), those a run gives a new batch: all but those already holding a live
-- batch made from the same run and basis (config, land schedule and imported files), so repeating `reval value`
-- changes nothing and a held batch stays held until a new run or a changed basis; a batch outdated by a
-- correction or an override (outdated_at) no longer counts, so the segment is staged again. $run, $basis, $segments.
SELECT DISTINCT p.segment
FROM parcel_estimates e JOIN parcels p ON p.parcel_id = e.parcel_id
WHERE e.run_id = $run AND list_contains($segments::VARCHAR[], p.segment)
  AND p.segment NOT IN (SELECT segment FROM batches
                        WHERE run_id = $run AND basis_sha256 = $basis AND outdated_at IS NULL
                          AND state IN ('staged', 'held', 'approved', 'exported'))
ORDER BY 1;
