-- Qualified, time-adjusted sales with a run's in-sample and out-of-fold model values, one row per sale, and
-- each sale's weight in the run's fit (1 when the run stored none): a multi-parcel sale compares its parcels'
-- summed values with its one price, counts in the groups of its most valuable parcel (named by it) and
-- carries its lightest parcel's weight. A sale of an overridden parcel is left out: the analyst set the model's
-- value aside there (the study of final values includes it). $1 run id.
SELECT a.sale_id, arg_max(a.parcel_id, exp(m.oof_log)) AS parcel_id,
       arg_max(a.adjusted_price, exp(m.oof_log)) AS price,
       sum(exp(m.oof_log)) AS oof_value, sum(exp(m.insample_log)) AS insample_value,
       arg_max(p.segment, exp(m.oof_log)) AS segment, arg_max(p.market_area, exp(m.oof_log)) AS market_area,
       arg_max(p.property_class, exp(m.oof_log)) AS property_class,
       min(coalesce(w.weight, 1.0)) AS weight, arg_min(w.reason, coalesce(w.weight, 1.0)) AS weight_reason
FROM adjusted_sales a
JOIN sale_predictions m ON m.sale_id = a.sale_id AND m.parcel_id = a.parcel_id AND m.run_id = $1
JOIN parcels p ON p.parcel_id = a.parcel_id
LEFT JOIN sale_weights w ON w.run_id = $1 AND w.sale_id = a.sale_id AND w.parcel_id = a.parcel_id
WHERE a.sale_id NOT IN (SELECT s.sale_id FROM adjusted_sales s JOIN overrides o ON o.parcel_id = s.parcel_id)
GROUP BY a.sale_id
ORDER BY a.sale_id;
