-- Insert the staged frame's rows (columns matched by name).
INSERT INTO adjusted_sales BY NAME SELECT * FROM staged_frame;
