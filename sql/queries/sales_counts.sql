-- Kept and excluded sales per segment and reason.
SELECT p.segment, coalesce(q.reason, 'qualified') AS outcome, count(*) AS n
FROM sale_qualification q JOIN parcels p USING (parcel_id)
GROUP BY ALL ORDER BY p.segment, outcome;
