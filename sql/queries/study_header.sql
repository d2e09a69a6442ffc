SELECT * FROM studies WHERE study_id = $1;
