-- The audit log (with the parcel an event is about, if any): one page, filtered and sorted, with the count of all. $segment (NULL = all), $text (part of
-- the kind, who or detail, '' = all), $sort (event | kind | segment | who), $descending, $limit, $offset.
WITH filtered AS (
    SELECT event_id, event_time, who, kind, segment, run_id, detail::VARCHAR AS detail,
           -- the parcel an event is about: an override or correction names it, a sale decision its first parcel
           coalesce(json_extract_string(detail, '$.parcel_id'), json_extract_string(detail, '$.parcels[0]'))
               AS parcel_id
    FROM events
    WHERE ($segment::VARCHAR IS NULL OR segment = $segment::VARCHAR)
      AND contains(lower(kind || ' ' || who || ' ' || coalesce(detail::VARCHAR, '')), lower($text::VARCHAR))
)
SELECT *, count(*) OVER () AS total_rows FROM filtered
ORDER BY
    CASE WHEN NOT $descending THEN CASE $sort WHEN 'event' THEN event_id END END ASC NULLS LAST,
    CASE WHEN $descending THEN CASE $sort WHEN 'event' THEN event_id END END DESC NULLS LAST,
    CASE WHEN NOT $descending THEN CASE $sort WHEN 'kind' THEN kind WHEN 'segment' THEN segment
                                              WHEN 'who' THEN who END END ASC NULLS LAST,
    CASE WHEN $descending THEN CASE $sort WHEN 'kind' THEN kind WHEN 'segment' THEN segment
                                          WHEN 'who' THEN who END END DESC NULLS LAST,
    event_id DESC
LIMIT $limit OFFSET $offset;
