-- (time-adjusted price, ratio) of a segment's sales for the scatter, at most $3 of them; a multi-parcel
-- sale is one point (its parcels' summed values over its one price), in the segment of its most valuable
-- parcel. $1 run id (NULL: prior values), $2 segment.
WITH s AS (
    SELECT a.sale_id, a.adjusted_price, p.segment,
           CASE WHEN $1 IS NULL THEN p.prior_value ELSE exp(m.oof_log) END AS value
    FROM adjusted_sales a
    JOIN parcels p ON p.parcel_id = a.parcel_id
    LEFT JOIN sale_predictions m ON m.run_id = $1 AND m.sale_id = a.sale_id AND m.parcel_id = a.parcel_id
    WHERE a.sale_id IN (SELECT x.sale_id FROM adjusted_sales x JOIN parcels y USING (parcel_id) WHERE y.segment = $2)
), by_sale AS (
    SELECT sale_id, arg_max(adjusted_price, value) AS price, sum(value) AS value, arg_max(segment, value) AS segment
    FROM s GROUP BY sale_id HAVING count(value) FILTER (WHERE value > 0) = count(*)
)
SELECT price, value / price AS ratio
FROM by_sale
WHERE segment = $2
ORDER BY sale_id
LIMIT $3;
