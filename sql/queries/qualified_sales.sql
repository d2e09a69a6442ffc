-- Qualified sales with what the trend and the models need, in a fixed order
-- (adjusted_price is NULL until the sales step has time-adjusted them); vouched = the analyst keeps it at full
-- weight in the fit (sale_decisions 'include').
SELECT s.sale_id, s.parcel_id, s.sale_date, s.sale_price, a.adjusted_price, p.segment, p.market_area,
       p.property_class, p.prior_value, coalesce(d.decision = 'include', false) AS vouched,
       d.reason AS analyst_reason
FROM sale_qualification q
JOIN sales s USING (sale_id, parcel_id)
JOIN parcels p USING (parcel_id)
LEFT JOIN adjusted_sales a USING (sale_id, parcel_id)
LEFT JOIN sale_decisions d ON d.sale_id = s.sale_id
WHERE q.qualified
ORDER BY s.sale_id, s.parcel_id;
