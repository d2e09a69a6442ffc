-- The stored position of a continuous feature (none when it was not imported as one). $1 feature name.
SELECT position FROM features WHERE name = $1 AND kind = 'continuous';
