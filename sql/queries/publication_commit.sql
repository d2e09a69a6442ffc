-- Mark a publication committed (inside the transaction that records what its files mean). $id.
UPDATE publications SET state = 'committed' WHERE publication_id = $id;
