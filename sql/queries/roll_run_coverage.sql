-- Does the run value exactly the imported parcels? Counts and an example of each mismatch. $1 run id.
SELECT count(*) FILTER (WHERE e.parcel_id IS NULL) AS missing,
       count(*) FILTER (WHERE p.parcel_id IS NULL) AS unknown,
       min(p.parcel_id) FILTER (WHERE e.parcel_id IS NULL) AS first_missing,
       min(e.parcel_id) FILTER (WHERE p.parcel_id IS NULL) AS first_unknown
FROM parcels p
FULL OUTER JOIN (SELECT parcel_id FROM parcel_estimates WHERE run_id = $1) e ON e.parcel_id = p.parcel_id;
