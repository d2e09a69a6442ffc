-- The sales of each batch's segment that its run's fit gave less than full weight, with their count, at most
-- $limit per batch, lowest weight first. $batch_ids, $limit.
SELECT b.batch_id, w.sale_id, w.parcel_id, w.weight, w.reason, count(*) OVER (PARTITION BY b.batch_id) AS n
FROM batches b
JOIN sale_weights w ON w.run_id = b.run_id
JOIN parcels p ON p.parcel_id = w.parcel_id AND p.segment = b.segment
WHERE list_contains($batch_ids::BIGINT[], b.batch_id) AND w.weight < 1
QUALIFY row_number() OVER (PARTITION BY b.batch_id ORDER BY w.weight, w.sale_id, w.parcel_id) <= $limit
ORDER BY b.batch_id, w.weight, w.sale_id, w.parcel_id;
