-- Record the judging basis (reval/stats/judging.py) approvals were decided under. $batch_ids, $sha256.
UPDATE batches SET judged_sha256 = $sha256 WHERE list_contains($batch_ids::BIGINT[], batch_id);
