-- The run's own out-of-fold accuracy for a segment: sales and root mean squared error of log value
-- against the log time-adjusted price. $1 run id, $2 segment.
SELECT count(*) AS n, sqrt(avg(power(m.oof_log - ln(a.adjusted_price), 2))) AS rmse_log
FROM sale_predictions m
JOIN adjusted_sales a ON a.sale_id = m.sale_id AND a.parcel_id = m.parcel_id
JOIN parcels p ON p.parcel_id = m.parcel_id
WHERE m.run_id = $1 AND p.segment = $2;
