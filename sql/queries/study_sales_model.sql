-- Qualified, time-adjusted sales with a run's in-sample and out-of-fold model values and each sale's weight in
-- the run's fit (1 when the run stored none). $1 run id.
SELECT a.sale_id, a.parcel_id, a.adjusted_price AS price,
       exp(m.oof_log) AS oof_value, exp(m.insample_log) AS insample_value,
       p.segment, p.market_area, p.property_class, coalesce(w.weight, 1.0) AS weight, w.reason AS weight_reason
FROM adjusted_sales a
JOIN sale_predictions m ON m.sale_id = a.sale_id AND m.parcel_id = a.parcel_id AND m.run_id = $1
JOIN parcels p ON p.parcel_id = a.parcel_id
LEFT JOIN sale_weights w ON w.run_id = $1 AND w.sale_id = a.sale_id AND w.parcel_id = a.parcel_id
ORDER BY a.sale_id, a.parcel_id;
