-- Value totals of each batch, for the event snapshots. $1 list of batch ids.
SELECT batch_id, count(*) AS n_parcels, sum(prior_value) AS prior_value, sum(market_value) AS market_value,
       sum(assessed_value) AS assessed_value
FROM roll_values WHERE list_contains($1::BIGINT[], batch_id)
GROUP BY batch_id;
