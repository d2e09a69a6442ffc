-- Record a publication before its temporary files are written.
-- $target, $target_tmp, $companion, $companion_tmp, $overwrite, $at.
INSERT INTO publications (state, target, target_tmp, companion, companion_tmp, overwrite, started_at)
VALUES ('writing', $target, $target_tmp, $companion, $companion_tmp, $overwrite, $at)
RETURNING publication_id;
