-- Store the current data fingerprint of a run's parcels ($parcel_ids: a list, or NULL for all) beside its
-- estimates; with $sales also the run's per-segment sales fingerprints. Needs fingerprint_macros. $run.
UPDATE parcel_estimates e SET data_md5 = f.data_md5
FROM parcel_fingerprints($parcel_ids::VARCHAR[]) f
WHERE e.run_id = $run AND e.parcel_id = f.parcel_id;
INSERT INTO run_sales_fingerprints
SELECT $run, segment, n_sales, data_md5 FROM sales_fingerprints() WHERE $sales;
