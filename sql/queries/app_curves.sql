-- A segment's curves on their grids, features in declared order. $1 run id, $2 segment.
SELECT c.feature, f.kind, f.levels, c.x, c.effect, c.lo, c.hi, c.parent_effect
FROM model_curves c JOIN features f ON f.name = c.feature
WHERE c.run_id = $1 AND c.segment = $2
ORDER BY f.position, c.x;
