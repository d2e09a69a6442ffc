INSERT INTO adjusted_sales SELECT * FROM adjusted_frame;
