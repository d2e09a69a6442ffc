-- Version 16: the rule for a segment's current batch, written once: its open (staged or held) batch, else its
-- certified one (approved before exported, the latest approval, the latest batch). The review and the app's
-- work lists read it.
CREATE OR REPLACE VIEW current_batches AS
SELECT * EXCLUDE (k)
FROM (SELECT *, row_number() OVER (PARTITION BY segment
                                   ORDER BY state IN ('staged', 'held') DESC, state = 'approved' DESC,
                                            approved_at DESC NULLS LAST, batch_id DESC) AS k
      FROM batches WHERE state IN ('staged', 'held', 'approved', 'exported'))
WHERE k = 1;
