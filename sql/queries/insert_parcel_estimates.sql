-- Insert the staged frame's rows (columns matched by name).
INSERT INTO parcel_estimates BY NAME SELECT * FROM staged_frame;
