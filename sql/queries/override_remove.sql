-- Remove one parcel's override. $1 parcel id.
DELETE FROM overrides WHERE parcel_id = $1;
