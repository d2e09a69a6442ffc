-- Replace one parcel's values of the corrected features with the checked ones (new_feature_values, built by
-- import_build from the staged cells). $parcel.
DELETE FROM feature_values
WHERE parcel_id = $parcel AND position IN (SELECT position FROM new_feature_values);
INSERT INTO feature_values SELECT $parcel, position, value FROM new_feature_values ORDER BY position;
