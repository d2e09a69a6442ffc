-- The parcels whose value in their segment's current batch (the open one, else the certified one) changes
-- beyond +/- $threshold against the prior value: one page, filtered and sorted, with the count of all.
-- $segment (NULL = all), $text (part of the parcel id, '' = all), $threshold, $sort (parcel | segment | prior |
-- value | change: by size), $descending, $limit, $offset.
WITH listed AS (
    SELECT v.parcel_id, b.segment, b.batch_id, b.state, v.prior_value, v.market_value,
           v.market_value / v.prior_value - 1 AS change
    FROM roll_values v JOIN current_batches b USING (batch_id)
    WHERE v.prior_value > 0 AND abs(v.market_value / v.prior_value - 1) > $threshold
      AND ($segment::VARCHAR IS NULL OR b.segment = $segment::VARCHAR)
      AND contains(lower(v.parcel_id), lower($text::VARCHAR))
)
SELECT *, count(*) OVER () AS total_rows FROM listed
ORDER BY
    CASE WHEN NOT $descending THEN CASE $sort WHEN 'prior' THEN prior_value WHEN 'value' THEN market_value
                                              WHEN 'change' THEN abs(change) END END ASC NULLS LAST,
    CASE WHEN $descending THEN CASE $sort WHEN 'prior' THEN prior_value WHEN 'value' THEN market_value
                                          WHEN 'change' THEN abs(change) END END DESC NULLS LAST,
    CASE WHEN NOT $descending THEN CASE $sort WHEN 'segment' THEN segment WHEN 'parcel' THEN parcel_id END END ASC,
    CASE WHEN $descending THEN CASE $sort WHEN 'segment' THEN segment WHEN 'parcel' THEN parcel_id END END DESC,
    parcel_id
LIMIT $limit OFFSET $offset;
