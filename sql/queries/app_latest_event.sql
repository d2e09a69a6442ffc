-- The newest event's id (0 when the log is empty): a cheap sign that another process changed the project.
SELECT coalesce(max(event_id), 0) FROM events;
