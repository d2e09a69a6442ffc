-- Per declared feature: how many imported parcels of the classes the model values lack its value (the model fills
-- these in, and the roll flags them), in feature order. $classes: the classes the model does not value.
-- Counted as (valued parcels) - (their known values): the known values of all parcels less those of the few parcels
-- of other classes, so the million-row feature table is scanned once and joined only with those few parcels.
WITH others AS (SELECT parcel_id FROM parcels WHERE list_contains($classes::VARCHAR[], property_class)),
known AS (
    SELECT position, count(value) AS n FROM feature_values GROUP BY position
    UNION ALL
    SELECT position, -count(value) FROM feature_values WHERE parcel_id IN (SELECT parcel_id FROM others) GROUP BY position
)
SELECT f.name, (SELECT count(*) FROM parcels) - (SELECT count(*) FROM others) - coalesce(sum(k.n), 0) AS n
FROM features f LEFT JOIN known k USING (position)
GROUP BY f.name, f.position
ORDER BY f.position;
