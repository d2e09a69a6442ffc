-- Each qualified sale of the given batches' parcels: its roll value and the out-of-fold value of the batch's
-- run (each summed over a multi-parcel sale's parcels, which must all lie in the batch), and its price as
-- sold and time-adjusted (one price for the whole sale). $batch_ids.
WITH sizes AS (
    SELECT sale_id, count(*) AS n_parcels FROM adjusted_sales GROUP BY sale_id
), parts AS (
    SELECT v.batch_id, a.sale_id, v.market_value, exp(m.oof_log) AS oof_value, a.adjusted_price, s.sale_price
    FROM roll_values v
    JOIN batches b ON b.batch_id = v.batch_id
    JOIN adjusted_sales a ON a.parcel_id = v.parcel_id
    JOIN sales s ON s.sale_id = a.sale_id AND s.parcel_id = a.parcel_id
    LEFT JOIN sale_predictions m ON m.run_id = b.run_id AND m.sale_id = a.sale_id AND m.parcel_id = a.parcel_id
    WHERE list_contains($batch_ids::BIGINT[], v.batch_id)
)
SELECT p.batch_id, p.sale_id, sum(p.market_value) AS roll_value, sum(p.oof_value) AS oof_value,
       any_value(p.adjusted_price) AS adjusted_price, any_value(p.sale_price) AS sale_price
FROM parts p JOIN sizes z USING (sale_id)
GROUP BY p.batch_id, p.sale_id
HAVING count(*) = any_value(z.n_parcels)
ORDER BY p.batch_id, p.sale_id;
