-- Insert the staged frame's rows (columns matched by name).
INSERT INTO parcel_contributions BY NAME SELECT * FROM staged_frame;
