-- Move batches to a new state; approval stamps approved_at, a return to staged clears it; a note given
-- replaces the stored one. $batch_ids, $state, $at, $note.
UPDATE batches
SET state = $state, changed_at = $at, note = coalesce($note, note),
    approved_at = CASE WHEN $state = 'approved' THEN $at WHEN $state = 'staged' THEN NULL ELSE approved_at END
WHERE list_contains($batch_ids::BIGINT[], batch_id);
