-- Every segment with its parcels, its parcels whose sales count (check_sold) and its problems per check.
SELECT p.segment, count(*) AS parcels, count(s.parcel_id) AS sold_parcels,
       coalesce(any_value(c.counts), MAP {}::MAP(VARCHAR, BIGINT)) AS counts
FROM parcels p
LEFT JOIN check_sold s USING (parcel_id)
LEFT JOIN (SELECT segment, map(list(code ORDER BY code), list(n ORDER BY code)) AS counts
           FROM (SELECT segment, code, count(*) AS n FROM check_rows GROUP BY ALL) GROUP BY segment) c
       ON c.segment = p.segment
GROUP BY p.segment
ORDER BY p.segment;
