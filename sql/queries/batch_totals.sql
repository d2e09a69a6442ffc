-- Value totals of one batch, for the event snapshot. $1 batch id.
SELECT count(*) AS n_parcels, sum(prior_value) AS prior_value, sum(market_value) AS market_value,
       sum(assessed_value) AS assessed_value
FROM roll_values WHERE batch_id = $1;
