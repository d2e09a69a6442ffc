-- Every parcel value of the new batches, set-based. The market value is the analyst's override where the parcel
-- has one (the overrides layer), else the run's estimate rounded; both are kept (model_value, override_reason),
-- and every rule below (land, level, caps) applies to the market value on the roll. Rounding is to the
-- nearest $rounding (halves away from zero; 0 = none). Land comes from roll_land_schedule (segment, base_lot_size, base_land_value,
-- size_exponent) when $allocate. A class the model does not value (roll_classes: property_class, rule) takes
-- the land value alone ('land_schedule') or no value ('not_valued', or a land-valued parcel the schedule
-- cannot value); an override values a parcel of any class. Caps come from roll_caps (reval.roll.valuation.cap_table: one rule per class), measured
-- from the prior ASSESSED value; a cap is lifted for new construction or a parcel sold after
-- $prior_roll_date when its rule says so. The assessed value is split into land and improvement like the
-- market value: assessed land = land x assessed / market rounded half up to a whole unit, which is the
-- largest-remainder split of reval.roll.split.apportion for two parts (tests/test_caps.py checks it).
-- $run, $batch_ids, $level, $rounding, $allocate, $lot_position, $prior_roll_date.
CREATE OR REPLACE TEMP MACRO roll_round(x, unit) AS CASE WHEN unit > 0 THEN round(x / unit) * unit ELSE x END;
CREATE OR REPLACE TEMP MACRO roll_round_down(x, unit) AS
    CASE WHEN unit > 0 THEN floor(x / unit + 1e-9) * unit ELSE x END;
CREATE OR REPLACE TEMP MACRO roll_round_up(x, unit) AS
    CASE WHEN unit > 0 THEN ceil(x / unit - 1e-9) * unit ELSE x END;
INSERT INTO roll_values BY NAME
WITH base AS (
    SELECT b.batch_id, p.parcel_id, p.segment, p.property_class, p.prior_value, p.prior_assessed_value,
           coalesce(p.new_construction, FALSE) AS new_construction,
           p.parcel_id IN (SELECT parcel_id FROM sales WHERE sale_date > $prior_roll_date::DATE) AS sold,
           coalesce(k.rule, 'model') AS rule,
           roll_round(e.market_value, $rounding::DOUBLE) AS model_value, f.value AS lot,
           o.value AS override_value, o.reason AS override_reason
    FROM parcel_estimates e
    JOIN parcels p ON p.parcel_id = e.parcel_id
    JOIN batches b ON b.segment = p.segment AND list_contains($batch_ids::BIGINT[], b.batch_id)
    LEFT JOIN feature_values f ON f.parcel_id = p.parcel_id AND f.position = $lot_position::SMALLINT
    LEFT JOIN roll_classes k ON k.property_class = p.property_class
    LEFT JOIN overrides o ON o.parcel_id = p.parcel_id
    WHERE e.run_id = $run
), scheduled AS (
    SELECT base.*, s.segment IS NOT NULL AS has_row,
           roll_round(CASE WHEN s.base_lot_size = 0 THEN s.base_land_value
                           ELSE s.base_land_value * pow(base.lot / s.base_lot_size, s.size_exponent) END,
                      $rounding::DOUBLE) AS raw_land
    FROM base
    LEFT JOIN roll_land_schedule s ON $allocate AND s.segment = base.segment
                                  AND (s.base_lot_size > 0) = (base.lot > 0)
), land AS (
    SELECT *, coalesce(override_value, CASE rule WHEN 'model' THEN model_value WHEN 'land_schedule' THEN raw_land END)
              AS market_value
    FROM scheduled
), capped AS (
    SELECT land.*, c.increase_label, c.decrease_label,
           roll_round(land.market_value * $level::DOUBLE, $rounding::DOUBLE) AS uncapped,
           roll_round_down(land.prior_assessed_value * (1 + c.max_increase), $rounding::DOUBLE) AS upper_value,
           roll_round_up(land.prior_assessed_value * (1 - c.max_decrease), $rounding::DOUBLE) AS lower_value,
           CASE WHEN c.exclude_new_construction AND land.new_construction THEN 'cap:lifted_new_construction'
                WHEN c.reset_on_sale AND land.sold THEN 'cap:lifted_sold' END AS lifted,
           CASE WHEN land.prior_assessed_value > 0 THEN
               CASE WHEN roll_round(land.market_value * $level::DOUBLE, $rounding::DOUBLE)
                         > land.prior_assessed_value * (1 + c.max_increase) THEN 'increase'
                    WHEN roll_round(land.market_value * $level::DOUBLE, $rounding::DOUBLE)
                         < land.prior_assessed_value * (1 - c.max_decrease) THEN 'decrease' END
           END AS binding
    FROM land LEFT JOIN roll_caps c ON c.property_class = land.property_class
), valued AS (
    SELECT capped.*,
           CASE WHEN lifted IS NOT NULL THEN uncapped
                WHEN binding = 'increase' THEN upper_value
                WHEN binding = 'decrease' THEN lower_value
                ELSE uncapped END AS assessed_value,
           CASE WHEN has_row AND market_value IS NOT NULL THEN least(raw_land, market_value) END AS land_value
    FROM capped
)
SELECT batch_id, parcel_id, property_class, prior_value, prior_assessed_value, market_value, land_value,
       CASE WHEN land_value IS NOT NULL THEN market_value - land_value END AS improvement_value,
       assessed_value,
       CASE WHEN land_value IS NOT NULL AND market_value > 0
            THEN floor(land_value * assessed_value / market_value + 0.5) END AS assessed_land_value,
       CASE WHEN land_value IS NOT NULL AND market_value > 0
            THEN assessed_value - floor(land_value * assessed_value / market_value + 0.5) END
           AS assessed_improvement_value,
       list_filter([CASE WHEN lifted IS NULL AND binding = 'increase' THEN increase_label
                         WHEN lifted IS NULL AND binding = 'decrease' THEN decrease_label
                         WHEN binding IS NOT NULL THEN lifted END,
                    CASE WHEN NOT $allocate THEN 'land:not_allocated'
                         WHEN lot IS NULL THEN 'land:no_lot_size'
                         WHEN NOT has_row THEN 'land:no_schedule_row'
                         WHEN raw_land > market_value THEN 'land:exceeds_total' END,
                    CASE WHEN override_reason IS NOT NULL THEN 'override:' || override_reason END],
                   lambda x: x IS NOT NULL) AS flags,
       model_value, override_reason
FROM valued;
