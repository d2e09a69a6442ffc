-- Parcel ids close to what was typed (for a "did you mean"): those containing it (starting with it first), then
-- those within a few typed characters of it (Levenshtein edit distance at most 2, or a third of its length).
-- $1 text, $2 how many.
SELECT parcel_id FROM parcels
WHERE contains(parcel_id, $1) OR levenshtein(parcel_id, $1) <= greatest(2, length($1) // 3)
ORDER BY NOT contains(parcel_id, $1), NOT starts_with(parcel_id, $1), levenshtein(parcel_id, $1), parcel_id
LIMIT $2;
