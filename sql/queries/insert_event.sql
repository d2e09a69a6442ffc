-- Append one event to the audit log. $1 event_time, $2 who, $3 kind, $4 segment, $5 run_id, $6 detail (JSON text).
INSERT INTO events (event_time, who, kind, segment, run_id, detail) VALUES ($1, $2, $3, $4, $5, $6::JSON);
