-- The review flags of the new batches' rows, added to the flags staging set (caps, land), with every row's flags
-- in words (reval/roll/flags.py describes each kind). Set-based: one pass over the rows, one over the parcels'
-- features. roll_classes (property_class, rule) holds each class's [classes] rule (absent = 'model').
-- $run, $batch_ids, $range_weight (sales lighter than this span no curve, reval/model/hierarchy.py RANGE_WEIGHT),
-- $min_sales ([standards] min_sales), $threshold ([assessment] review_change_threshold).
CREATE OR REPLACE TEMP MACRO flag_number(x) AS
    CASE WHEN x = round(x) THEN format('{:,}', CAST(x AS BIGINT)) ELSE format('{:,.2f}', x) END;
CREATE OR REPLACE TEMP MACRO flag_level(f_kind, f_levels, x) AS
    CASE WHEN f_kind IN ('ordinal', 'categorical') THEN f_levels[CAST(x AS INTEGER) + 1]
         WHEN f_kind = 'binary' THEN CASE WHEN x = 1 THEN 'yes' ELSE 'no' END
         ELSE flag_number(x) END;
UPDATE roll_values v
SET flags = list_concat(v.flags, n.codes),
    flag_text = nullif(array_to_string(list_concat(n.before, n.texts), '; '), '')
FROM (
    WITH rows AS (
        SELECT v.batch_id, v.parcel_id, b.segment, p.market_area, v.property_class, v.market_value, v.prior_value,
               v.model_value, v.flags, coalesce(c.rule, 'model') AS rule
        FROM roll_values v
        JOIN batches b ON b.batch_id = v.batch_id
        JOIN parcels p ON p.parcel_id = v.parcel_id
        LEFT JOIN roll_classes c ON c.property_class = v.property_class
        WHERE list_contains($batch_ids::BIGINT[], v.batch_id)
    ), sold AS (   -- the parcels of the sales the run's fit rested on
        SELECT DISTINCT s.parcel_id, p.segment, p.market_area
        FROM sale_predictions s
        JOIN parcels p ON p.parcel_id = s.parcel_id
        LEFT JOIN sale_weights w ON w.run_id = s.run_id AND w.sale_id = s.sale_id AND w.parcel_id = s.parcel_id
        WHERE s.run_id = $run AND s.fold >= 0 AND coalesce(w.weight, 1) >= $range_weight
    ), sold_values AS (
        SELECT s.segment, s.market_area, f.position, f.value
        FROM sold s JOIN feature_values f ON f.parcel_id = s.parcel_id
        WHERE f.value IS NOT NULL
    ), segment_range AS (
        SELECT segment, position, min(value) AS lo, max(value) AS hi FROM sold_values GROUP BY ALL
    ), area_range AS (
        SELECT market_area, position, min(value) AS lo, max(value) AS hi FROM sold_values GROUP BY ALL
    ), all_range AS (
        SELECT position, min(value) AS lo, max(value) AS hi FROM sold_values GROUP BY ALL
    ), segment_sales AS (
        SELECT p.segment, count(DISTINCT s.sale_id) AS n
        FROM sale_predictions s JOIN parcels p ON p.parcel_id = s.parcel_id
        WHERE s.run_id = $run
        GROUP BY p.segment
    ), questioned AS (   -- a model-valued parcel's missing features, and its continuous ones beyond the sales
        SELECT r.batch_id, r.parcel_id, f.position, f.name, x.value, f.kind, f.levels, m.fill_value,
               coalesce(sr.lo, ar.lo) AS lo, coalesce(sr.hi, ar.hi) AS hi, al.lo AS all_lo, al.hi AS all_hi
        FROM rows r
        CROSS JOIN features f
        LEFT JOIN feature_values x ON x.parcel_id = r.parcel_id AND x.position = f.position
        LEFT JOIN segment_range sr ON sr.segment = r.segment AND sr.position = f.position
        LEFT JOIN area_range ar ON ar.market_area = r.market_area AND ar.position = f.position
        LEFT JOIN all_range al ON al.position = f.position
        LEFT JOIN run_features m ON m.run_id = $run AND m.position = f.position
        WHERE r.rule = 'model'
          AND (x.value IS NULL
               OR (f.kind = 'continuous' AND (x.value < coalesce(sr.lo, ar.lo) OR x.value > coalesce(sr.hi, ar.hi))))
    ), by_feature AS (
        SELECT batch_id, parcel_id,
               list(CASE WHEN value IS NULL THEN 'filled:' ELSE 'beyond:' END || name ORDER BY position) AS codes,
               list(CASE WHEN value IS NULL
                         THEN name || ' missing: filled in with ' || coalesce(flag_level(kind, levels, fill_value),
                                                                              'the typical value of the sales')
                         WHEN value < all_lo OR value > all_hi
                         THEN name || ' ' || flag_number(value) || ' is beyond every sale (' || flag_number(all_lo)
                              || ' to ' || flag_number(all_hi) || '): valued as at '
                              || flag_number(least(greatest(value, all_lo), all_hi))
                         ELSE name || ' ' || flag_number(value) || ' is beyond the segment''s sales ('
                              || flag_number(lo) || ' to ' || flag_number(hi) || '): its own curve is held at '
                              || flag_number(least(greatest(value, lo), hi)) || ', the wider market''s applies' END
                    ORDER BY position) AS texts
        FROM questioned
        GROUP BY batch_id, parcel_id
    )
    SELECT r.batch_id, r.parcel_id,
           list_filter([CASE WHEN r.rule <> 'model' THEN 'class:' || r.rule END], lambda x: x IS NOT NULL)
               || coalesce(q.codes, [])
               || list_filter([CASE WHEN r.rule = 'model' AND coalesce(n.n, 0) < $min_sales THEN 'few_sales' END,
                               CASE WHEN r.prior_value > 0 AND abs(r.market_value / r.prior_value - 1) > $threshold
                                    THEN 'far_from_prior' END], lambda x: x IS NOT NULL) AS codes,
           list_transform(r.flags, lambda c:
               CASE WHEN c LIKE 'cap:max_increase_%'
                         THEN 'assessed value capped at the prior assessed value + '
                              || replace(c, 'cap:max_increase_', '')
                    WHEN c LIKE 'cap:max_decrease_%'
                         THEN 'assessed value held at the prior assessed value - '
                              || replace(c, 'cap:max_decrease_', '')
                    WHEN c = 'cap:lifted_new_construction' THEN 'cap lifted: new construction'
                    WHEN c = 'cap:lifted_sold' THEN 'cap lifted: sold since the prior roll'
                    WHEN c LIKE 'override:%'
                         THEN 'value set by the analyst (' || replace(c, 'override:', '') || '), the model''s '
                              || coalesce(flag_number(r.model_value), 'none')
                    WHEN c = 'land:not_allocated' THEN 'no land schedule: land and improvement not allocated'
                    WHEN c = 'land:no_lot_size' THEN 'no lot size: land and improvement not allocated'
                    WHEN c = 'land:no_schedule_row'
                         THEN 'no land schedule row for this segment and kind of lot: land and improvement not allocated'
                    WHEN c = 'land:exceeds_total'
                         THEN 'the land schedule''s value exceeds the market value: land = market value, improvement 0'
                    ELSE c END) AS before,
           list_filter([CASE r.rule WHEN 'land_schedule'
                             THEN 'property class ' || r.property_class || ' is valued by the land schedule alone'
                                  || CASE WHEN r.market_value IS NULL THEN ', which gives it no value' ELSE '' END
                             WHEN 'not_valued'
                             THEN 'property class ' || r.property_class || ' is not valued by reval: it needs a '
                                  || 'manual value before its segment can be approved' END], lambda x: x IS NOT NULL)
               || coalesce(q.texts, [])
               || list_filter([CASE WHEN r.rule = 'model' AND coalesce(n.n, 0) < $min_sales
                                    THEN 'segment judged on ' || coalesce(n.n, 0) || ' sale(s), fewer than '
                                         || $min_sales || ' ([standards] min_sales)' END,
                               CASE WHEN r.prior_value > 0 AND abs(r.market_value / r.prior_value - 1) > $threshold
                                    THEN 'value ' || format('{:+.1f}', 100 * (r.market_value / r.prior_value - 1))
                                         || '% from the prior value, beyond the review threshold of +/-'
                                         || flag_number(100 * $threshold) || '%' END], lambda x: x IS NOT NULL) AS texts
    FROM rows r
    LEFT JOIN by_feature q ON q.batch_id = r.batch_id AND q.parcel_id = r.parcel_id
    LEFT JOIN segment_sales n ON n.segment = r.segment
) n
WHERE v.batch_id = n.batch_id AND v.parcel_id = n.parcel_id;
