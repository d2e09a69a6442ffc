-- How the imported parcels differ from those a run was fitted on: counts of parcels added (imported, not in
-- the run), removed (in the run, no longer imported), changed (fingerprint differs) and not fingerprinted
-- (a run made before fingerprints), with up to 3 ids of each. Needs fingerprint_macros. $run.
WITH compared AS (
    SELECT coalesce(f.parcel_id, e.parcel_id) AS parcel_id,
           CASE WHEN e.parcel_id IS NULL THEN 'added'
                WHEN f.parcel_id IS NULL THEN 'removed'
                WHEN e.data_md5 IS NULL THEN 'unknown'
                WHEN e.data_md5 <> f.data_md5 THEN 'changed' END AS change
    FROM parcel_fingerprints(NULL) f
    FULL OUTER JOIN (SELECT parcel_id, data_md5 FROM parcel_estimates WHERE run_id = $run) e
        ON e.parcel_id = f.parcel_id
)
SELECT change, count(*) AS n, list(parcel_id ORDER BY parcel_id)[1:3] AS examples
FROM compared WHERE change IS NOT NULL
GROUP BY change ORDER BY change;
