-- Insert the staged frame's rows (columns matched by name).
INSERT INTO study_downweighted BY NAME SELECT * FROM staged_frame;
