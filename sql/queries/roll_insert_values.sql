-- Every parcel value of the new batches, set-based. The market value is the analyst's override where the parcel
-- has one (the overrides layer), else the run's estimate rounded; both are kept (model_value, override_reason),
-- and every rule below (land, level, caps) applies to the market value on the roll. Rounding is to the nearest $rounding (halves away from
-- zero; 0 = none). Land comes from roll_land_schedule (segment, base_lot_size, base_land_value,
-- size_exponent) when $allocate; caps from roll_caps (property_class, max_increase, label).
-- $run, $batch_ids, $level, $rounding, $allocate, $lot_position.
CREATE OR REPLACE TEMP MACRO roll_round(x, unit) AS CASE WHEN unit > 0 THEN round(x / unit) * unit ELSE x END;
CREATE OR REPLACE TEMP MACRO roll_round_down(x, unit) AS
    CASE WHEN unit > 0 THEN floor(x / unit + 1e-9) * unit ELSE x END;
INSERT INTO roll_values
WITH base AS (
    SELECT b.batch_id, p.parcel_id, p.segment, p.property_class, p.prior_value,
           coalesce(o.value, roll_round(e.market_value, $rounding::DOUBLE)) AS market_value, f.value AS lot,
           roll_round(e.market_value, $rounding::DOUBLE) AS model_value, o.reason AS override_reason
    FROM parcel_estimates e
    JOIN parcels p ON p.parcel_id = e.parcel_id
    JOIN batches b ON b.segment = p.segment AND list_contains($batch_ids::BIGINT[], b.batch_id)
    LEFT JOIN feature_values f ON f.parcel_id = p.parcel_id AND f.position = $lot_position::SMALLINT
    LEFT JOIN overrides o ON o.parcel_id = p.parcel_id
    WHERE e.run_id = $run
), land AS (
    SELECT base.*, s.segment IS NOT NULL AS has_row,
           roll_round(CASE WHEN s.base_lot_size = 0 THEN s.base_land_value
                           ELSE s.base_land_value * pow(base.lot / s.base_lot_size, s.size_exponent) END,
                      $rounding::DOUBLE) AS raw_land
    FROM base
    LEFT JOIN roll_land_schedule s ON $allocate AND s.segment = base.segment
                                  AND (s.base_lot_size > 0) = (base.lot > 0)
), valued AS (
    SELECT land.*, c.label AS cap_label,
           roll_round(land.market_value * $level::DOUBLE, $rounding::DOUBLE) AS uncapped,
           roll_round_down(land.prior_value * (1 + c.max_increase), $rounding::DOUBLE) AS cap_value,
           coalesce(land.prior_value > 0
                    AND roll_round(land.market_value * $level::DOUBLE, $rounding::DOUBLE)
                        > land.prior_value * (1 + c.max_increase), FALSE) AS capped
    FROM land LEFT JOIN roll_caps c ON c.property_class = land.property_class
)
SELECT batch_id, parcel_id, property_class, prior_value, market_value,
       CASE WHEN has_row THEN least(raw_land, market_value) END AS land_value,
       CASE WHEN has_row THEN market_value - least(raw_land, market_value) END AS improvement_value,
       CASE WHEN capped THEN cap_value ELSE uncapped END AS assessed_value,
       list_filter([CASE WHEN capped THEN cap_label END,
                    CASE WHEN NOT $allocate THEN 'land:not_allocated'
                         WHEN lot IS NULL THEN 'land:no_lot_size'
                         WHEN NOT has_row THEN 'land:no_schedule_row'
                         WHEN raw_land > market_value THEN 'land_exceeds_total' END],
                   lambda x: x IS NOT NULL) AS flags,
       model_value, override_reason
FROM valued;
