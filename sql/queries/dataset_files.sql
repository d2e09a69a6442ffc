-- The files behind the current data set.
SELECT role, path, sha256, n_rows FROM dataset_files ORDER BY role;
