SELECT feature, importance_mean, importance_std FROM feature_importance WHERE run_id = $1
ORDER BY importance_mean DESC;
