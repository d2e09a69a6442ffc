-- Every parcel (of one segment, or all) with its value in its segment's current batch (the open one, else the
-- certified one; none before values are staged) and the change against its prior value: one page, filtered and
-- sorted, with the count of all. $segment (NULL = all), $text (part of the parcel id or class, '' = all),
-- $sort (parcel | segment | class | prior | value | change), $descending, $limit, $offset.
WITH listed AS (
    SELECT p.parcel_id, p.segment, p.property_class, p.prior_value, v.market_value,
           CASE WHEN p.prior_value > 0 THEN v.market_value / p.prior_value - 1 END AS change, b.state
    FROM parcels p
    LEFT JOIN current_batches b ON b.segment = p.segment
    LEFT JOIN roll_values v ON v.batch_id = b.batch_id AND v.parcel_id = p.parcel_id
    WHERE ($segment::VARCHAR IS NULL OR p.segment = $segment::VARCHAR)
      AND contains(lower(p.parcel_id || ' ' || p.property_class), lower($text::VARCHAR))
)
SELECT *, count(*) OVER () AS total_rows FROM listed
ORDER BY
    CASE WHEN NOT $descending THEN CASE $sort WHEN 'prior' THEN prior_value WHEN 'value' THEN market_value
                                              WHEN 'change' THEN change END END ASC NULLS LAST,
    CASE WHEN $descending THEN CASE $sort WHEN 'prior' THEN prior_value WHEN 'value' THEN market_value
                                          WHEN 'change' THEN change END END DESC NULLS LAST,
    CASE WHEN NOT $descending THEN CASE $sort WHEN 'segment' THEN segment WHEN 'class' THEN property_class
                                              WHEN 'parcel' THEN parcel_id END END ASC,
    CASE WHEN $descending THEN CASE $sort WHEN 'segment' THEN segment WHEN 'class' THEN property_class
                                          WHEN 'parcel' THEN parcel_id END END DESC,
    parcel_id
LIMIT $limit OFFSET $offset;
