-- The stored market trend of every area, by month before the valuation month.
SELECT area, month_offset, log_index, lo, hi, n_sales FROM market_trend ORDER BY area, month_offset;
