-- Every segment, market area and property class (and segment x class pair) that has parcels, so a study
-- lists the groups without sales as "no sales".
SELECT DISTINCT segment, market_area, property_class FROM parcels ORDER BY ALL;
