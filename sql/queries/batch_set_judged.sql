-- Record the judging basis (reval/stats/judging.py) an approval was decided under. $1 batch id, $2 sha256.
UPDATE batches SET judged_sha256 = $2 WHERE batch_id = $1;
