-- One parcel's feature values, with level codes shown as their labels. $1 parcel id.
SELECT f.name, f.kind, v.value,
       CASE WHEN v.value IS NULL THEN NULL
            WHEN f.kind IN ('ordinal', 'categorical') THEN f.levels[CAST(v.value AS INTEGER) + 1]
            WHEN f.kind = 'binary' THEN CASE WHEN v.value = 1 THEN 'yes' ELSE 'no' END
       END AS label
FROM features f
LEFT JOIN feature_values v ON v.position = f.position AND v.parcel_id = $1
ORDER BY f.position;
