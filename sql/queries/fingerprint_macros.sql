-- The one definition of the data fingerprints a run stores and `reval value` compares (reval/data/fingerprint.py).
-- parcel_fingerprints(ids): each parcel's md5 of what a run's model reads for it: segment, market area,
-- property class and its feature values in position order (import stores one row per parcel and feature,
-- NULL = missing); ids = a list of parcel ids or NULL for every parcel. About 10 s at a million parcels with
-- 9 features on the shared 2-core machine (string_agg of name=value pairs took 25 s).
-- sales_fingerprints(): per segment, the md5 of its qualified sales as the fit reads them (id, parcel, date,
-- price, time-adjusted price) with the analyst's decision on each, and their number.
CREATE OR REPLACE TEMP MACRO parcel_fingerprints(ids) AS TABLE
SELECT p.parcel_id, md5(concat_ws('|', p.segment, p.market_area, p.property_class, v.vals::VARCHAR)) AS data_md5
FROM parcels p
LEFT JOIN (SELECT parcel_id, list(value ORDER BY position) AS vals FROM feature_values
           WHERE ids IS NULL OR list_contains(ids, parcel_id) GROUP BY parcel_id) v USING (parcel_id)
WHERE ids IS NULL OR list_contains(ids, p.parcel_id);

CREATE OR REPLACE TEMP MACRO sales_fingerprints() AS TABLE
SELECT p.segment, count(*) AS n_sales,
       md5(string_agg(concat_ws('|', s.sale_id, s.parcel_id, CAST(s.sale_date AS VARCHAR),
                                CAST(s.sale_price AS VARCHAR), coalesce(CAST(a.adjusted_price AS VARCHAR), 'NA'),
                                coalesce(d.decision, '-')), ',' ORDER BY s.sale_id, s.parcel_id)) AS data_md5
FROM sale_qualification q
JOIN sales s USING (sale_id, parcel_id)
JOIN parcels p USING (parcel_id)
LEFT JOIN adjusted_sales a USING (sale_id, parcel_id)
LEFT JOIN sale_decisions d ON d.sale_id = s.sale_id
WHERE q.qualified
GROUP BY p.segment;
