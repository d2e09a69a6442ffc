-- How many parcels of the given batches carry each flag, and how many carry an override ('overridden'). $batch_ids.
SELECT flag, count(*) AS n
FROM (SELECT unnest(flags) AS flag FROM roll_values WHERE list_contains($batch_ids::BIGINT[], batch_id)
      UNION ALL
      SELECT 'overridden' FROM roll_values
      WHERE list_contains($batch_ids::BIGINT[], batch_id) AND override_reason IS NOT NULL)
GROUP BY flag ORDER BY flag;
