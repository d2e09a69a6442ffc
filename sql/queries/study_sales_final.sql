-- Qualified, time-adjusted sales with the final roll values (market value after overrides) of the given batches,
-- one row per sale: a multi-parcel sale compares its parcels' summed values with its one price (left out unless
-- every parcel has a roll value) and counts in the groups of its most valuable parcel (named by it). $batch_ids.
SELECT a.sale_id, arg_max(a.parcel_id, v.market_value) AS parcel_id,
       arg_max(a.adjusted_price, v.market_value) AS price, sum(v.market_value) AS value,
       arg_max(p.segment, v.market_value) AS segment, arg_max(p.market_area, v.market_value) AS market_area,
       arg_max(p.property_class, v.market_value) AS property_class
FROM adjusted_sales a
JOIN parcels p USING (parcel_id)
LEFT JOIN roll_values v ON v.parcel_id = a.parcel_id AND list_contains($batch_ids::BIGINT[], v.batch_id)
GROUP BY a.sale_id
HAVING count(*) = count(v.market_value)
ORDER BY a.sale_id;
