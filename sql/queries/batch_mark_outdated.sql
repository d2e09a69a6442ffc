-- Mark a segment's batches that still count (staged, held, approved, exported) as outdated: their values no
-- longer match the data or the overrides, so the segment needs a new value step and decision. Values stay as
-- they are (approved and exported values never change). $segment, $at.
UPDATE batches SET outdated_at = $at
WHERE segment = $segment AND state IN ('staged', 'held', 'approved', 'exported') AND outdated_at IS NULL;
