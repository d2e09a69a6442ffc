-- Every sale (of one segment's parcels, or all), qualified or not with the rule that excluded it, with its
-- time-adjusted price once the sales are prepared: one page, filtered and sorted, with the count of all.
-- $segment (NULL = all), $text (part of the sale id, parcel id, status or reason, '' = all), $sort (sale |
-- parcel | segment | date | price | adjusted | status), $descending, $limit, $offset.
WITH listed AS (
    SELECT x.sale_id, x.parcel_id, p.segment, x.sale_date, x.sale_price, a.adjusted_price,
           CASE WHEN q.qualified THEN 'qualified' WHEN q.qualified IS NULL THEN 'not prepared' ELSE 'excluded'
           END AS status,
           q.reason
    FROM sales x
    JOIN parcels p ON p.parcel_id = x.parcel_id
    LEFT JOIN sale_qualification q ON q.sale_id = x.sale_id AND q.parcel_id = x.parcel_id
    LEFT JOIN adjusted_sales a ON a.sale_id = x.sale_id AND a.parcel_id = x.parcel_id
    WHERE ($segment::VARCHAR IS NULL OR p.segment = $segment::VARCHAR)
      AND contains(lower(x.sale_id || ' ' || x.parcel_id || ' '
                         || CASE WHEN q.qualified THEN 'qualified' WHEN q.qualified IS NULL THEN 'not prepared'
                                 ELSE 'excluded' END || ' ' || coalesce(q.reason, '')), lower($text::VARCHAR))
)
SELECT *, count(*) OVER () AS total_rows FROM listed
ORDER BY
    CASE WHEN NOT $descending THEN CASE $sort WHEN 'price' THEN sale_price WHEN 'adjusted' THEN adjusted_price
                                              END END ASC NULLS LAST,
    CASE WHEN $descending THEN CASE $sort WHEN 'price' THEN sale_price WHEN 'adjusted' THEN adjusted_price
                                          END END DESC NULLS LAST,
    CASE WHEN NOT $descending THEN CASE $sort WHEN 'date' THEN sale_date END END ASC,
    CASE WHEN $descending THEN CASE $sort WHEN 'date' THEN sale_date END END DESC,
    CASE WHEN NOT $descending THEN CASE $sort WHEN 'sale' THEN sale_id WHEN 'parcel' THEN parcel_id
                                              WHEN 'segment' THEN segment WHEN 'status' THEN status END END ASC,
    CASE WHEN $descending THEN CASE $sort WHEN 'sale' THEN sale_id WHEN 'parcel' THEN parcel_id
                                          WHEN 'segment' THEN segment WHEN 'status' THEN status END END DESC,
    sale_id, parcel_id
LIMIT $limit OFFSET $offset;
