-- Column names of a CSV file as the staging reads them, in file order. $1: path.
SELECT column_name FROM (DESCRIBE SELECT * FROM read_csv($1, all_varchar = true, header = true, delim = ',',
                                                         quote = '"', escape = '"'));
