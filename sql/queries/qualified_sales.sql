-- Qualified sales with what the trend and the models need, in a fixed order
-- (adjusted_price is NULL until the sales step has time-adjusted them).
SELECT s.sale_id, s.parcel_id, s.sale_date, s.sale_price, a.adjusted_price, p.segment, p.market_area,
       p.property_class, p.prior_value
FROM sale_qualification q
JOIN sales s USING (sale_id, parcel_id)
JOIN parcels p USING (parcel_id)
LEFT JOIN adjusted_sales a USING (sale_id, parcel_id)
WHERE q.qualified
ORDER BY s.sale_id, s.parcel_id;
