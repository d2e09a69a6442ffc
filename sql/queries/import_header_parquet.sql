-- Column names of a Parquet file, in file order. $1: path.
SELECT column_name FROM (DESCRIBE SELECT * FROM read_parquet($1));
