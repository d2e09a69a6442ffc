-- Stored studies that trimmed one of this parcel's sales as an outlier. $1 parcel id.
SELECT DISTINCT t.study_id, t.sale_id FROM study_trimmed t WHERE t.parcel_id = $1 ORDER BY 1, 2;
