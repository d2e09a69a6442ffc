-- Parcel ids that start with, or contain, what was typed (for a "did you mean"). $1 text, $2 how many.
SELECT parcel_id FROM parcels WHERE parcel_id LIKE '%' || $1 || '%'
ORDER BY NOT starts_with(parcel_id, $1), parcel_id LIMIT $2;
