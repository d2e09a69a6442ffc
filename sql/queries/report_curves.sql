-- Every segment's curves of a run's continuous and ordinal features, features in declared order. $1 run id.
SELECT c.segment, c.feature, f.kind, c.x, c.effect, c.parent_effect
FROM model_curves c JOIN features f ON f.name = c.feature
WHERE c.run_id = $1 AND f.kind IN ('continuous', 'ordinal')
ORDER BY f.position, c.segment, c.x;
