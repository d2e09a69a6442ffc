INSERT INTO market_trend SELECT * FROM trend_frame;
