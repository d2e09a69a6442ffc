-- A parcel's additive log-value parts in a run, the base ('(base)') first, then the largest. $1 run id, $2 parcel id.
SELECT term, contribution FROM parcel_contributions
WHERE run_id = $1 AND parcel_id = $2
ORDER BY term <> '(base)', abs(contribution) DESC, term;
