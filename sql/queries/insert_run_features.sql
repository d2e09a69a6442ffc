-- Insert the staged frame's rows (columns matched by name).
INSERT INTO run_features BY NAME SELECT * FROM staged_frame;
