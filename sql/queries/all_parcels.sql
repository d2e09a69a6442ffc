-- Every parcel with its segment and market area, in parcel id order.
SELECT parcel_id, segment, market_area FROM parcels ORDER BY parcel_id;
