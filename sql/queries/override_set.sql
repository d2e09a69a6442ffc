-- Set (or replace) one parcel's override. $1 parcel id, $2 value, $3 reason code, $4 note, $5 time, $6 who.
INSERT OR REPLACE INTO overrides VALUES ($1, $2, $3, $4, $5, $6);
