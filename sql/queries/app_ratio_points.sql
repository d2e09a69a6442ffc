-- (time-adjusted price, ratio) of a segment's sales for the scatter, at most $3 of them.
-- $1 run id (NULL: prior values), $2 segment.
SELECT a.adjusted_price AS price,
       CASE WHEN $1 IS NULL THEN p.prior_value ELSE exp(m.oof_log) END / a.adjusted_price AS ratio
FROM adjusted_sales a
JOIN parcels p ON p.parcel_id = a.parcel_id
LEFT JOIN sale_predictions m ON m.run_id = $1 AND m.sale_id = a.sale_id AND m.parcel_id = a.parcel_id
WHERE p.segment = $2 AND (CASE WHEN $1 IS NULL THEN p.prior_value ELSE exp(m.oof_log) END) > 0
ORDER BY a.sale_id, a.parcel_id
LIMIT $3;
