-- Insert a run's structure choices from the staged frame (columns matched by name).
INSERT INTO run_structure BY NAME SELECT * FROM staged_frame;
