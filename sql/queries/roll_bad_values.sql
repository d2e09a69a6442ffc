-- Roll rows whose values cannot go on a roll, at most 10 (and how many in all): market and assessed values
-- must be finite and positive; prior, land and improvement values finite and not negative where present.
-- $batch_ids.
CREATE OR REPLACE TEMP MACRO roll_bad_amount(x, lo) AS NOT coalesce(isfinite(x) AND x >= lo, TRUE);
SELECT v.parcel_id, b.segment,
       concat_ws('; ',
           CASE WHEN roll_bad_amount(v.market_value, 0.01) THEN 'market value ' || v.market_value END,
           CASE WHEN roll_bad_amount(v.assessed_value, 0.01) THEN 'assessed value ' || v.assessed_value END,
           CASE WHEN roll_bad_amount(v.prior_value, 0) THEN 'prior value ' || v.prior_value END,
           CASE WHEN roll_bad_amount(v.land_value, 0) THEN 'land value ' || v.land_value END,
           CASE WHEN roll_bad_amount(v.improvement_value, 0) THEN 'improvement value ' || v.improvement_value END
       ) AS problem,
       count(*) OVER () AS n
FROM roll_values v JOIN batches b ON b.batch_id = v.batch_id
WHERE list_contains($batch_ids::BIGINT[], v.batch_id)
  AND (roll_bad_amount(v.market_value, 0.01) OR roll_bad_amount(v.assessed_value, 0.01)
       OR roll_bad_amount(v.prior_value, 0) OR roll_bad_amount(v.land_value, 0)
       OR roll_bad_amount(v.improvement_value, 0))
ORDER BY b.segment, v.parcel_id
LIMIT 10;
