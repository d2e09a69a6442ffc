-- Insert the staged frame's rows (columns matched by name).
INSERT INTO model_interactions BY NAME SELECT * FROM staged_frame;
