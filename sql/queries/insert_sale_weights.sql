-- Insert a run's sale weights from the staged frame (run_id, sale_id, parcel_id, weight, residual, vouched,
-- analyst_reason); the reason is written here, set-based: how far the price lies from the run's value for a sale of
-- weight below 1, or that the analyst fixed it at 1.
INSERT INTO sale_weights
SELECT run_id, sale_id, parcel_id, weight, residual,
       CASE WHEN vouched THEN 'full weight, vouched for by the analyst: ' || analyst_reason
            WHEN weight < 1 THEN printf('price %s%.0f%% from the model''s value: weight %.2f',
                                        CASE WHEN residual >= 0 THEN '+' ELSE '' END, 100 * (exp(residual) - 1), weight)
       END
FROM staged_frame;
