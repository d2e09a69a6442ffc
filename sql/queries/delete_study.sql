-- Remove a stored study before it is replaced. $1 study id.
DELETE FROM study_trimmed WHERE study_id = $1;
DELETE FROM study_downweighted WHERE study_id = $1;
DELETE FROM study_groups WHERE study_id = $1;
DELETE FROM studies WHERE study_id = $1;
