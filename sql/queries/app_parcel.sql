-- One parcel's identity and prior values (every prior_* column). $1 parcel id.
SELECT * EXCLUDE (source_line) FROM parcels WHERE parcel_id = $1;
