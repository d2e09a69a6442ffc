-- Feature values of the qualified sales' parcels as a dense (sale x feature) grid, NULL = missing,
-- in the order of qualified_sales.sql and feature position.
SELECT v.value
FROM sale_qualification q
CROSS JOIN features f
LEFT JOIN feature_values v ON v.parcel_id = q.parcel_id AND v.position = f.position
WHERE q.qualified
ORDER BY q.sale_id, q.parcel_id, f.position;
