-- Forget the previous qualification, trend and adjusted prices (inside the step's transaction).
DELETE FROM adjusted_sales;
DELETE FROM market_trend;
DELETE FROM sale_qualification;
