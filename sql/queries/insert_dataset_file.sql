INSERT INTO dataset_files (role, path, sha256, n_rows) VALUES ($1, $2, $3, $4);
