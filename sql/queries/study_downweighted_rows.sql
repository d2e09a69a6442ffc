-- A stored study's down-weighted sales, lowest weight first per group. $1 study id.
SELECT group_name, sale_id, parcel_id, weight, reason FROM study_downweighted WHERE study_id = $1
ORDER BY group_name, weight, sale_id, parcel_id;
