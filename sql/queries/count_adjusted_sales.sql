SELECT count(*) FROM adjusted_sales;
