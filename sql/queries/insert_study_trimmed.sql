INSERT INTO study_trimmed SELECT * FROM trimmed_frame;
