-- Qualified, time-adjusted sales with the prior roll value as the value under study, one row per sale: a
-- multi-parcel sale compares its parcels' summed prior values with its one price (left out when a parcel
-- has no prior value) and counts in the groups of its most valuable parcel (named by it).
SELECT a.sale_id, arg_max(a.parcel_id, p.prior_value) AS parcel_id,
       arg_max(a.adjusted_price, p.prior_value) AS price, sum(p.prior_value) AS value,
       arg_max(p.segment, p.prior_value) AS segment, arg_max(p.market_area, p.prior_value) AS market_area,
       arg_max(p.property_class, p.prior_value) AS property_class
FROM adjusted_sales a JOIN parcels p USING (parcel_id)
GROUP BY a.sale_id
HAVING count(*) = count(p.prior_value) FILTER (WHERE p.prior_value > 0)
ORDER BY a.sale_id;
