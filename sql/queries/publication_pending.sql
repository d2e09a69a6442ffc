-- Publications a process did not finish, oldest first.
SELECT publication_id, state, target, target_tmp, companion, companion_tmp, overwrite, started_at
FROM publications ORDER BY publication_id;
