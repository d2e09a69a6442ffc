-- When the sales a study reads last changed: the latest import, sales step or decision on a sale (NULL: never).
SELECT max(event_time) FROM events WHERE kind IN ('import', 'sales') OR kind LIKE 'sale\_%' ESCAPE '\';
