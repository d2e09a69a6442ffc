-- A run's structure choices in the order they were made: per step, the choice, its candidates (chosen first, then
-- by criterion and value). $1 run id.
SELECT step, choice, criterion, candidate, value, chosen
FROM run_structure WHERE run_id = $1
ORDER BY step, choice, criterion, chosen DESC, value, candidate;
