-- Insert the staged frame's rows (columns matched by name).
INSERT INTO sale_predictions BY NAME SELECT * FROM staged_frame;
