-- The reference parcel a segment's contributions are measured from in a run, in feature order. $1 run id, $2 segment.
SELECT r.feature, r.value, r.shown, r.how
FROM segment_references r LEFT JOIN features f ON f.name = r.feature
WHERE r.run_id = $1 AND r.segment = $2
ORDER BY f.position, r.feature;
