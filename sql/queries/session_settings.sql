-- Per-connection settings: no terminal progress bar from DuckDB on long statements (it would mix into
-- --json output and the app); the memory DuckDB may hold before it spills to temporary files beside the
-- database ([files] memory_mb; a process-wide setting). $memory_limit, e.g. '1024MB'.
SET enable_progress_bar = false;
SET memory_limit = $memory_limit;
