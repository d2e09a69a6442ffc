-- Insert the staged frame's rows (columns matched by name).
INSERT INTO segment_models BY NAME SELECT * FROM staged_frame;
