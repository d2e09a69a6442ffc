-- Interactions acting in a segment. $1 run id, $2 segment.
SELECT term, coef, se, p_value FROM model_interactions
WHERE run_id = $1 AND segment = $2 ORDER BY abs(coef) DESC, term;
