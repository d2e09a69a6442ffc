-- Insert the staged frame's rows (columns matched by name).
INSERT INTO marginal_effects BY NAME SELECT * FROM staged_frame;
