-- The decisions in the audit log: batches approved, held, revoked, superseded, exported, sales excluded or
-- included, oldest first.
SELECT event_time, who, kind, segment, run_id, detail FROM events
WHERE kind LIKE 'batch_%' AND kind NOT IN ('batch_staged', 'batch_replaced') OR kind LIKE 'sale\_%' ESCAPE '\' OR kind LIKE '%override%'
ORDER BY event_id;
