-- Quantiles of a feature over all parcels (the size bands of a study) and whether any parcel lacks a value.
-- $1 feature position, $2 list of probabilities.
SELECT quantile_cont(v.value, $2) AS edges, count(*) FILTER (WHERE v.value IS NULL) AS missing
FROM parcels p LEFT JOIN feature_values v ON v.parcel_id = p.parcel_id AND v.position = $1;
