-- How many parcels of the given batches carry each flag. $batch_ids.
SELECT flag, count(*) AS n
FROM (SELECT unnest(flags) AS flag FROM roll_values WHERE list_contains($batch_ids::BIGINT[], batch_id))
GROUP BY flag ORDER BY flag;
