-- How many of a segment's sales a run's fit gave less than full weight. $1 run id, $2 segment.
SELECT count(*) FROM sale_weights w JOIN parcels p USING (parcel_id) WHERE w.run_id = $1 AND p.segment = $2
AND w.weight < 1;
