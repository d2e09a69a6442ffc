-- Every parcel with its segment, market area and property class, in parcel id order.
SELECT parcel_id, segment, market_area, property_class FROM parcels ORDER BY parcel_id;
