-- Qualified, time-adjusted sales with the prior roll value as the value under study.
SELECT a.sale_id, a.parcel_id, a.adjusted_price AS price, p.prior_value AS value,
       p.segment, p.market_area, p.property_class
FROM adjusted_sales a JOIN parcels p USING (parcel_id)
WHERE p.prior_value > 0
ORDER BY a.sale_id, a.parcel_id;
