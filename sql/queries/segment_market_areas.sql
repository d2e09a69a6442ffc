SELECT segment, market_area FROM segments ORDER BY segment;
