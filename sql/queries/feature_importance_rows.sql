-- A run's permutation importance, per model, most important feature first. $1 run id.
SELECT model, feature, importance_mean, importance_std FROM feature_importance WHERE run_id = $1
ORDER BY model, importance_mean DESC;
