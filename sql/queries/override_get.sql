-- One parcel's standing override, if any. $1 parcel id.
SELECT value, reason, note, set_at, who FROM overrides WHERE parcel_id = $1;
