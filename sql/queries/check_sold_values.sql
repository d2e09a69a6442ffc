-- The feature values of the parcels whose sales count (check_sold), in (parcel, feature) order: the typical
-- value the model fills a blank with is read from them.
SELECT v.value
FROM feature_values v JOIN check_sold USING (parcel_id)
ORDER BY v.parcel_id, v.position;
