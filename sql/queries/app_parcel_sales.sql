-- Every recorded sale of a parcel: qualified or why not, its time-adjusted price and out-of-fold ratio (for a
-- multi-parcel sale: its parcels' summed out-of-fold values over its one price). $1 run id (NULL: no run),
-- $2 parcel id.
SELECT s.sale_id, s.sale_date, s.sale_price, s.validity, q.qualified, q.reason, a.adjusted_price,
       (SELECT sum(exp(m.oof_log)) FROM sale_predictions m WHERE m.run_id = $1 AND m.sale_id = s.sale_id)
           / a.adjusted_price AS oof_ratio
FROM sales s
LEFT JOIN sale_qualification q ON q.sale_id = s.sale_id AND q.parcel_id = s.parcel_id
LEFT JOIN adjusted_sales a ON a.sale_id = s.sale_id AND a.parcel_id = s.parcel_id
WHERE s.parcel_id = $2
ORDER BY s.sale_date DESC, s.sale_id;
