-- How many sales the sales tab lists for a segment: its qualified, time-adjusted sales and those the analyst
-- excluded. $1 segment.
SELECT (SELECT count(*) FROM adjusted_sales a JOIN parcels p USING (parcel_id) WHERE p.segment = $1)
     + (SELECT count(*) FROM sales x JOIN parcels p USING (parcel_id) JOIN sale_decisions d ON d.sale_id = x.sale_id
        WHERE d.decision = 'exclude' AND p.segment = $1);
