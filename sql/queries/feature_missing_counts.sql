-- Per declared feature: how many imported parcels of the classes the model values lack its value (the model fills
-- these in, and the roll flags them), in feature order. $classes: the classes the model does not value.
SELECT f.name, count(p.parcel_id) - count(v.value) AS n
FROM features f
CROSS JOIN (SELECT parcel_id FROM parcels WHERE NOT list_contains($classes::VARCHAR[], property_class)) p
LEFT JOIN feature_values v ON v.parcel_id = p.parcel_id AND v.position = f.position
GROUP BY f.name, f.position
ORDER BY f.position;
