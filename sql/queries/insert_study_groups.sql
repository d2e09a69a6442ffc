-- Insert the staged frame's rows (columns matched by name).
INSERT INTO study_groups BY NAME SELECT * FROM staged_frame;
