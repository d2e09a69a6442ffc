-- Per batch of $batch_ids: its rows without a market value (reval/roll/flags.py `approval_blockers`), how many
-- and the first few.
SELECT batch_id, count(*) AS n,
       list(parcel_id || ' (' || property_class || ')' ORDER BY parcel_id)[1:5] AS examples
FROM roll_values
WHERE list_contains($batch_ids::BIGINT[], batch_id) AND market_value IS NULL
GROUP BY batch_id;
