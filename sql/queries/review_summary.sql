-- Per batch: totals and the distribution of new market value / prior value (parcels with a prior value),
-- and how many parcels changed by more than the review threshold (flag 'far_from_prior'). $batch_ids.
SELECT batch_id, count(*) AS n_parcels, count(prior_value) FILTER (WHERE prior_value > 0) AS n_with_prior,
       sum(prior_value) AS prior_total, sum(market_value) AS market_total, sum(assessed_value) AS assessed_total,
       sum(land_value) AS land_total, sum(improvement_value) AS improvement_total,
       quantile_cont(market_value / prior_value, [0.05, 0.25, 0.5, 0.75, 0.95])
           FILTER (WHERE prior_value > 0) AS ratio_quantiles,
       count(*) FILTER (WHERE list_contains(flags, 'far_from_prior')) AS n_beyond
FROM roll_values
WHERE list_contains($batch_ids::BIGINT[], batch_id)
GROUP BY batch_id;
