-- Replace one parcel's estimate and contributions in a run with those of the run's stored model on its corrected
-- data (frames correct_estimate: log_value, market_value; correct_parts: term, contribution). $run, $parcel.
UPDATE parcel_estimates SET log_value = c.log_value, market_value = c.market_value
FROM correct_estimate c WHERE run_id = $run AND parcel_id = $parcel;
DELETE FROM parcel_contributions WHERE run_id = $run AND parcel_id = $parcel;
INSERT INTO parcel_contributions SELECT $run, $parcel, term, contribution FROM correct_parts;
