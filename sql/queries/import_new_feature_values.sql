-- The feature values built from the staged cells (import_build), by position.
SELECT position, value FROM new_feature_values ORDER BY position;
