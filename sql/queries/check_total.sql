-- How many check rows pass the filters. $segment, $code: NULL = any.
SELECT count(*) FROM check_rows
WHERE ($segment IS NULL OR segment = $segment) AND ($code IS NULL OR code = $code);
