-- The audit log, oldest first, optionally for one segment. $segment (NULL = all).
SELECT event_id, event_time, who, kind, segment, run_id, detail
FROM events
WHERE $segment::VARCHAR IS NULL OR segment = $segment::VARCHAR
ORDER BY event_id;
