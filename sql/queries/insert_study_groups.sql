INSERT INTO study_groups SELECT * FROM groups_frame;
