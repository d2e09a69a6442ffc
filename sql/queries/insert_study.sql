-- Store a study's header (its groups and trimmed sales go in with insert_study_groups and _trimmed).
INSERT INTO studies (study_id, created_at, values_source, run_id, grouping, trim_iqr_k, confidence, n_boot, seed,
                     config_sha256, judged_sha256, sales_sha256)
VALUES ($1, $2, $3, $4, $5, $6, $7, $8, $9, $10, $11, $12);
