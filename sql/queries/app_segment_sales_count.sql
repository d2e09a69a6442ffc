-- How many qualified, time-adjusted sales a segment has. $1 segment.
SELECT count(*) FROM adjusted_sales a JOIN parcels p USING (parcel_id) WHERE p.segment = $1;
