-- Headline counts of the current data set.
SELECT (SELECT count(*) FROM parcels) AS parcels,
       (SELECT count(*) FROM sales) AS sales,
       (SELECT count(*) FROM segments) AS segments,
       (SELECT count(*) FROM market_areas) AS market_areas,
       (SELECT count(DISTINCT property_class) FROM parcels) AS property_classes;
