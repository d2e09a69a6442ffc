-- Every recorded sale of a parcel: qualified or why not, its time-adjusted price and out-of-fold ratio.
-- $1 run id (NULL: no run), $2 parcel id.
SELECT s.sale_id, s.sale_date, s.sale_price, s.validity, q.qualified, q.reason, a.adjusted_price,
       exp(m.oof_log) / a.adjusted_price AS oof_ratio
FROM sales s
LEFT JOIN sale_qualification q ON q.sale_id = s.sale_id AND q.parcel_id = s.parcel_id
LEFT JOIN adjusted_sales a ON a.sale_id = s.sale_id AND a.parcel_id = s.parcel_id
LEFT JOIN sale_predictions m ON m.run_id = $1 AND m.sale_id = s.sale_id AND m.parcel_id = s.parcel_id
WHERE s.parcel_id = $2
ORDER BY s.sale_date DESC, s.sale_id;
