-- Insert the staged frame's rows (columns matched by name).
INSERT INTO feature_importance BY NAME SELECT * FROM staged_frame;
