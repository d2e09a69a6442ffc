-- Every imported segment.
SELECT segment FROM segments ORDER BY segment;
