-- Names of the tables present (the app reads databases of any schema version and degrades gracefully).
SELECT table_name FROM information_schema.tables WHERE table_schema = 'main' ORDER BY table_name;
