-- Insert the staged frame's rows (columns matched by name).
INSERT INTO reference_accuracy BY NAME SELECT * FROM staged_frame;
