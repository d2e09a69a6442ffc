-- One parcel's identity and prior value. $1 parcel id.
SELECT parcel_id, segment, market_area, property_class, prior_value, latitude, longitude
FROM parcels WHERE parcel_id = $1;
