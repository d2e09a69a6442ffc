-- Parcels and sales per segment, for the overview.
SELECT s.segment, s.market_area, s.n_parcels,
       (SELECT count(*) FROM sales x JOIN parcels p USING (parcel_id) WHERE p.segment = s.segment) AS n_sales
FROM segments s
ORDER BY s.market_area, s.segment;
