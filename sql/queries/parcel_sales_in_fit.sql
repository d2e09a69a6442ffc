-- How many of a parcel's sales a run was fitted on or valued (its sale predictions). $1 run id, $2 parcel id.
SELECT count(*) FROM sale_predictions WHERE run_id = $1 AND parcel_id = $2;
