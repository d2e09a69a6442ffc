-- Insert the staged frame's rows (columns matched by name).
INSERT INTO segment_references BY NAME SELECT * FROM staged_frame;
