-- A parcel's values in the batches that still count (staged, held, approved, exported), newest first.
-- $1 parcel id.
SELECT b.batch_id, b.state, b.run_id, v.market_value, v.land_value, v.improvement_value, v.assessed_value,
       v.assessed_land_value, v.assessed_improvement_value, v.flags, v.flag_text, v.model_value, v.override_reason
FROM roll_values v JOIN batches b ON b.batch_id = v.batch_id
WHERE v.parcel_id = $1 AND b.state IN ('staged', 'held', 'approved', 'exported')
ORDER BY b.batch_id DESC;
