-- Per declared feature: how many imported parcels lack its value (the model fills these in, and the roll flags
-- them), in feature order.
SELECT f.name, (SELECT count(*) FROM parcels) - count(v.value) AS n
FROM features f LEFT JOIN feature_values v ON v.position = f.position
GROUP BY f.name, f.position
ORDER BY f.position;
