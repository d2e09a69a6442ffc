-- Rows of a Parquet file (from its metadata). $1: path.
SELECT count(*) FROM read_parquet($1);
