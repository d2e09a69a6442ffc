-- Each parcel's value change ratio (new market value / prior value) and whether it sold: "sold" = it has a
-- qualified sale (the sales the models and ratio studies use). $batch_ids.
SELECT v.batch_id, v.market_value / v.prior_value AS ratio,
       v.parcel_id IN (SELECT parcel_id FROM sale_qualification WHERE qualified) AS sold
FROM roll_values v
WHERE list_contains($batch_ids::BIGINT[], v.batch_id) AND v.prior_value > 0 AND v.market_value IS NOT NULL;
