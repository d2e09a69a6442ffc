-- Version 13: a study records a fingerprint of the sales it was computed on (reval/stats/study.py), so the
-- approval gate can reuse a stored study of the same sales under the same judging basis instead of
-- recomputing every segment's bootstrap (approving 300 segments at once).
ALTER TABLE studies ADD COLUMN sales_sha256 VARCHAR;
