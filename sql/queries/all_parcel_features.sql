-- Feature values of every parcel as a dense (parcel x feature) grid, NULL = missing, in the order of
-- all_parcels.sql and feature position.
SELECT v.value
FROM parcels p
CROSS JOIN features f
LEFT JOIN feature_values v ON v.parcel_id = p.parcel_id AND v.position = f.position
ORDER BY p.parcel_id, f.position;
