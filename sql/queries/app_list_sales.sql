-- Sales left out of models and studies (not qualified, with the reason) and sales the run's fit gave less than
-- full weight (with why): one page, filtered and sorted, with the count of all. $run_id (NULL: exclusions
-- only), $segment (NULL = all), $text (part of the sale id, parcel id or reason, '' = all), $sort (sale |
-- parcel | segment | date | price | weight | reason), $descending, $limit, $offset.
WITH listed AS (
    SELECT q.sale_id, q.parcel_id, p.segment, x.sale_date, x.sale_price, 'excluded' AS status,
           NULL::DOUBLE AS weight, q.reason
    FROM sale_qualification q
    JOIN sales x ON x.sale_id = q.sale_id AND x.parcel_id = q.parcel_id
    LEFT JOIN parcels p ON p.parcel_id = q.parcel_id
    WHERE NOT q.qualified
    UNION ALL
    SELECT w.sale_id, w.parcel_id, p.segment, x.sale_date, x.sale_price, 'down-weighted' AS status, w.weight, w.reason
    FROM sale_weights w
    JOIN sales x ON x.sale_id = w.sale_id AND x.parcel_id = w.parcel_id
    JOIN parcels p ON p.parcel_id = w.parcel_id
    WHERE w.run_id = $run_id::VARCHAR AND w.weight < 1
), filtered AS (
    SELECT * FROM listed
    WHERE ($segment::VARCHAR IS NULL OR segment = $segment::VARCHAR)
      AND contains(lower(sale_id || ' ' || parcel_id || ' ' || coalesce(reason, '')), lower($text::VARCHAR))
)
SELECT *, count(*) OVER () AS total_rows FROM filtered
ORDER BY
    CASE WHEN NOT $descending THEN CASE $sort WHEN 'price' THEN sale_price WHEN 'weight' THEN weight END END ASC NULLS LAST,
    CASE WHEN $descending THEN CASE $sort WHEN 'price' THEN sale_price WHEN 'weight' THEN weight END END DESC NULLS LAST,
    CASE WHEN NOT $descending THEN CASE $sort WHEN 'date' THEN sale_date END END ASC NULLS LAST,
    CASE WHEN $descending THEN CASE $sort WHEN 'date' THEN sale_date END END DESC NULLS LAST,
    CASE WHEN NOT $descending THEN CASE $sort WHEN 'sale' THEN sale_id WHEN 'parcel' THEN parcel_id
                                              WHEN 'segment' THEN segment WHEN 'reason' THEN reason END END ASC NULLS LAST,
    CASE WHEN $descending THEN CASE $sort WHEN 'sale' THEN sale_id WHEN 'parcel' THEN parcel_id
                                          WHEN 'segment' THEN segment WHEN 'reason' THEN reason END END DESC NULLS LAST,
    sale_id, parcel_id, status
LIMIT $limit OFFSET $offset;
