-- Drop the parcel values of replaced batches (the batch rows and their events stay). $batch_ids.
DELETE FROM roll_values WHERE list_contains($batch_ids::BIGINT[], batch_id);
