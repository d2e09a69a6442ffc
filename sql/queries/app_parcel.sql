-- One parcel's identity and prior values (prior_value is the prior market value). $1 parcel id.
SELECT parcel_id, segment, market_area, property_class, prior_value, prior_assessed_value, latitude, longitude
FROM parcels WHERE parcel_id = $1;
