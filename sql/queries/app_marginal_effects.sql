-- Value per unit and elasticity of each feature at the segment's typical parcel. $1 run id, $2 segment.
SELECT m.feature, m.value_per_unit, m.elasticity
FROM marginal_effects m LEFT JOIN features f ON f.name = m.feature
WHERE m.run_id = $1 AND m.segment = $2
ORDER BY f.position, m.feature;
