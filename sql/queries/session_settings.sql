-- Per-connection settings: no terminal progress bar from DuckDB on long statements (it would mix into
-- --json output and the app).
SET enable_progress_bar = false;
