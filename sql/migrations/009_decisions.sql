-- Version 9: decisions that hold. A study and an approval record the judging basis (reval/stats/judging.py:
-- the standards and study settings) they were judged under, so a change of standards afterwards shows.
ALTER TABLE batches ADD COLUMN judged_sha256 VARCHAR;   -- set when approved: the basis the gate judged under
ALTER TABLE studies ADD COLUMN judged_sha256 VARCHAR;
-- Median ratio by decile of the IAAO value proxy, beside those by price (regressivity read without the
-- bias of sorting by price).
ALTER TABLE study_groups ADD COLUMN proxy_decile_medians DOUBLE[];
-- Sales are placed by day: a sale's month offset from the valuation date is fractional.
ALTER TABLE adjusted_sales ALTER COLUMN month_offset SET DATA TYPE DOUBLE;
