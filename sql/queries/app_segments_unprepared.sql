-- The overview's segments before sales are prepared or any model is run (schema version 1).
SELECT segment, market_area, n_parcels AS parcels, 0 AS sales, NULL AS kind, NULL AS borrowed_share,
       NULL AS reason, NULL AS value_change
FROM segments ORDER BY segment;
