-- A stored study's groups, in name order. $1 study id.
SELECT * FROM study_groups WHERE study_id = $1 ORDER BY group_name;
