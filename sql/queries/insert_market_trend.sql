-- Insert the staged frame's rows (columns matched by name).
INSERT INTO market_trend BY NAME SELECT * FROM staged_frame;
