-- Qualified sales with what the trend and the models need, in a fixed order (adjusted_price is NULL until
-- the sales step has time-adjusted them). A multi-parcel sale lists each parcel with the one package price;
-- n_parcels counts its parcels and price_share is the parcel's part of the package by prior value (equal
-- parts when a prior value is missing), which the fit uses when multi-parcel sales are fitted at all.
-- vouched = the analyst keeps the sale at full weight in the fit (sale_decisions 'include').
WITH rows AS (
    SELECT s.sale_id, s.parcel_id, s.sale_date, s.sale_price, a.adjusted_price, p.segment, p.market_area,
           p.property_class, p.prior_value, coalesce(d.decision = 'include', false) AS vouched,
           d.reason AS analyst_reason,
           count(*) OVER (PARTITION BY s.sale_id) AS n_parcels,
           count(p.prior_value) FILTER (WHERE p.prior_value > 0) OVER (PARTITION BY s.sale_id) AS n_prior,
           sum(p.prior_value) FILTER (WHERE p.prior_value > 0) OVER (PARTITION BY s.sale_id) AS prior_total
    FROM sale_qualification q
    JOIN sales s USING (sale_id, parcel_id)
    JOIN parcels p USING (parcel_id)
    LEFT JOIN adjusted_sales a USING (sale_id, parcel_id)
    LEFT JOIN sale_decisions d ON d.sale_id = s.sale_id
    WHERE q.qualified
)
SELECT sale_id, parcel_id, sale_date, sale_price, adjusted_price, segment, market_area, property_class,
       prior_value, vouched, analyst_reason, n_parcels,
       CASE WHEN n_prior = n_parcels THEN prior_value / prior_total ELSE 1.0 / n_parcels END AS price_share
FROM rows
ORDER BY sale_id, parcel_id;
