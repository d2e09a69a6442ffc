-- The property classes of the imported parcels.
SELECT DISTINCT property_class FROM parcels ORDER BY 1;
