-- One feature's value for every parcel with a prepared sale (NULL when it has none). $1 feature position.
SELECT a.parcel_id, v.value
FROM (SELECT DISTINCT parcel_id FROM adjusted_sales) a
LEFT JOIN feature_values v ON v.parcel_id = a.parcel_id AND v.position = $1;
