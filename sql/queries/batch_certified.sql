-- Each segment's certified batch: its approved batch, else its latest exported one.
SELECT batch_id, segment, run_id, state, n_parcels, approved_at, note, judged_sha256, outdated_at
FROM (SELECT *, row_number() OVER (PARTITION BY segment
                                   ORDER BY state = 'approved' DESC, approved_at DESC, batch_id DESC) AS k
      FROM batches WHERE state IN ('approved', 'exported'))
WHERE k = 1
ORDER BY segment;
