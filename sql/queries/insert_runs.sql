-- Insert the staged frame's rows (columns matched by name).
INSERT INTO runs BY NAME SELECT * FROM staged_frame;
