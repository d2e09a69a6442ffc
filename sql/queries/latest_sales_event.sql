-- The detail of the last sales step's event (its trend notes). No row before the first sales step.
SELECT detail FROM events WHERE kind = 'sales' ORDER BY event_id DESC LIMIT 1;
