-- The feature values of some parcels (a subject and its comparables), level codes shown as their labels
-- (NULL label: a number, or missing). $1 list of parcel ids.
SELECT p.parcel_id, f.name, v.value,
       CASE WHEN v.value IS NULL THEN NULL
            WHEN f.kind IN ('ordinal', 'categorical') THEN f.levels[CAST(v.value AS INTEGER) + 1]
            WHEN f.kind = 'binary' THEN CASE WHEN v.value = 1 THEN 'yes' ELSE 'no' END
       END AS label
FROM (SELECT unnest($1::VARCHAR[]) AS parcel_id) p
CROSS JOIN features f
LEFT JOIN feature_values v ON v.position = f.position AND v.parcel_id = p.parcel_id
ORDER BY p.parcel_id, f.position;
