-- Every decade (10-year floor) of a feature over all parcels, NULL for parcels without a value, so a study by
-- age lists the decades without sales. $1 feature position.
SELECT DISTINCT floor(v.value / 10) * 10 AS decade
FROM parcels p LEFT JOIN feature_values v ON v.parcel_id = p.parcel_id AND v.position = $1
ORDER BY decade NULLS LAST;
