-- Version 6: permutation importance is stored for each reference model that has it (gradient boosting,
-- random forest), not for gradient boosting alone; rows stored before name the model they came from.
ALTER TABLE feature_importance ADD COLUMN model VARCHAR DEFAULT 'gradient_boosting';
ALTER TABLE feature_importance ALTER COLUMN model DROP DEFAULT;
ALTER TABLE feature_importance ALTER COLUMN model SET NOT NULL;
