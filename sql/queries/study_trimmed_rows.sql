SELECT group_name, sale_id, parcel_id, ratio FROM study_trimmed WHERE study_id = $1 ORDER BY group_name, ratio;
