-- Forget a publication whose files are in place (or were cleaned away). $id.
DELETE FROM publications WHERE publication_id = $id;
