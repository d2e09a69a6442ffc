-- Per batch: how many parcels carry each flag code, and each kind of flag (the code before ':'; a parcel with two
-- filled-in features counts once for 'filled'). $batch_ids.
WITH codes AS (
    SELECT batch_id, parcel_id, unnest(flags) AS code
    FROM roll_values WHERE list_contains($batch_ids::BIGINT[], batch_id)
)
SELECT batch_id, 'code' AS level, code AS flag, count(*) AS n FROM codes GROUP BY ALL
UNION ALL
SELECT batch_id, 'kind', split_part(code, ':', 1), count(DISTINCT parcel_id) FROM codes GROUP BY ALL
ORDER BY batch_id, level, flag;
