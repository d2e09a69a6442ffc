-- Every parcel's feature values counted by segment, feature, value and sold or not (a qualified sale): the
-- representativeness tests run on these counts, so a million parcels become one row per distinct value.
SELECT p.segment, v.position, v.value, q.parcel_id IS NOT NULL AS sold, count(*) AS n
FROM parcels p
JOIN feature_values v ON v.parcel_id = p.parcel_id
LEFT JOIN (SELECT DISTINCT parcel_id FROM sale_qualification WHERE qualified) q ON q.parcel_id = p.parcel_id
WHERE v.value IS NOT NULL
GROUP BY ALL
ORDER BY p.segment, v.position, v.value, sold;
