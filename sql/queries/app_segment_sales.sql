-- One page of a segment's sales: first those the analyst excluded (sale_decisions; so they can be reinstated),
-- then its qualified sales with the value under study and its ratio, extremes first, and each sale's weight in
-- the latest run's fit (NULL without a run) and why it is below 1 (for an excluded sale: the analyst's reason).
-- The ratio of a multi-parcel sale is its parcels' summed values over its one price (shown on each of its rows).
-- $1 run id of the values (NULL: prior values), $2 segment, $3 study id (for the trimmed mark), $4 page size,
-- $5 offset, $6 the latest run id (for the weights).
WITH parts AS (
    SELECT a.sale_id, a.parcel_id, x.sale_date, x.sale_price, a.adjusted_price, p.segment,
           CASE WHEN $1 IS NULL THEN p.prior_value ELSE exp(m.oof_log) END AS value, m.fold
    FROM adjusted_sales a
    JOIN sales x ON x.sale_id = a.sale_id AND x.parcel_id = a.parcel_id
    JOIN parcels p ON p.parcel_id = a.parcel_id
    LEFT JOIN sale_predictions m ON m.run_id = $1 AND m.sale_id = a.sale_id AND m.parcel_id = a.parcel_id
    WHERE a.sale_id IN (SELECT y.sale_id FROM adjusted_sales y JOIN parcels z USING (parcel_id) WHERE z.segment = $2)
), s AS (
    SELECT *, sum(value) OVER (PARTITION BY sale_id) AS sale_value FROM parts
), listed AS (
    SELECT s.sale_id, s.parcel_id, s.sale_date, s.sale_price, s.adjusted_price, s.value, s.fold,
           s.sale_value / s.adjusted_price AS ratio, t.sale_id IS NOT NULL AS trimmed, w.weight,
           w.reason AS weight_reason, false AS excluded
    FROM s
    LEFT JOIN study_trimmed t ON t.study_id = $3 AND t.group_name = $2 AND t.sale_id = s.sale_id
    LEFT JOIN sale_weights w ON w.run_id = $6 AND w.sale_id = s.sale_id AND w.parcel_id = s.parcel_id
    WHERE s.segment = $2
    UNION ALL
    SELECT x.sale_id, x.parcel_id, x.sale_date, x.sale_price, NULL, NULL, NULL, NULL, false, NULL,
           'excluded by analyst: ' || d.reason, true
    FROM sales x JOIN parcels p USING (parcel_id) JOIN sale_decisions d ON d.sale_id = x.sale_id
    WHERE d.decision = 'exclude' AND p.segment = $2
)
SELECT * FROM listed
ORDER BY excluded DESC, abs(ln(ratio)) DESC NULLS LAST, sale_id, parcel_id
LIMIT $4 OFFSET $5;
