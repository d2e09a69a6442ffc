-- Rows of the given batches without a market value (reval/roll/flags.py `approval_blockers`), the first few and
-- how many in all. $batch_ids.
SELECT parcel_id, property_class, count(*) OVER () AS n
FROM roll_values
WHERE list_contains($batch_ids::BIGINT[], batch_id) AND market_value IS NULL
ORDER BY parcel_id
LIMIT 5;
