-- The parcels of each batch that changed most beyond the review threshold (flag 'far_from_prior', set at staging
-- by reval/roll/flags.py), at most $limit per batch. $batch_ids, $limit.
SELECT batch_id, parcel_id, property_class, prior_value, market_value, market_value / prior_value - 1 AS change
FROM roll_values
WHERE list_contains($batch_ids::BIGINT[], batch_id) AND list_contains(flags, 'far_from_prior')
QUALIFY row_number() OVER (PARTITION BY batch_id ORDER BY abs(market_value / prior_value - 1) DESC, parcel_id)
        <= $limit
ORDER BY batch_id, abs(change) DESC, parcel_id;
