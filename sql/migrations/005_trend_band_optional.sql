-- Version 5: the market trend's band may be unknown (NULL) when there are too few sales to estimate
-- the noise; the index itself is still stored.
ALTER TABLE market_trend ALTER COLUMN lo DROP NOT NULL;
ALTER TABLE market_trend ALTER COLUMN hi DROP NOT NULL;
