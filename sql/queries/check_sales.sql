-- Problems of the sales in the sale window ($start to $valuation_date); common practice in screening sales,
-- no standard sets the limits:
--   built_after_sale  the parcel's year built ($year) is after the sale's year: the price paid was for the
--                     land or an earlier building, not for the parcel as recorded;
--   price_per_area    a single-parcel sale's price per unit of living area ($area) more than $area_factor
--                     times its segment's median (over the sales that count: qualified after the sales step,
--                     $prepared, else all), or less than the median divided by it;
--   price_vs_prior    a single-parcel sale's price more than $prior_factor times the prior value, or less
--                     than the prior value divided by it;
--   duplicate_sale    two or more sales of one parcel on one day (from repeat_sales, reval/data/sales.py);
--   repeat_sale       a parcel sold on more than one day in the window: every one of its sales is listed.
-- $segment: only this segment (NULL: all).
INSERT INTO check_rows
WITH w AS (
    SELECT s.sale_id, s.parcel_id, p.segment, s.sale_date, s.sale_price, p.prior_value, q.qualified,
           count(*) OVER (PARTITION BY s.sale_id) AS n_parcels, y.value AS year, a.value AS area
    FROM sales s JOIN parcels p USING (parcel_id)
    LEFT JOIN sale_qualification q USING (sale_id, parcel_id)
    LEFT JOIN feature_values y ON y.parcel_id = s.parcel_id AND y.position = $year
    LEFT JOIN feature_values a ON a.parcel_id = s.parcel_id AND a.position = $area
    WHERE s.sale_date BETWEEN $start AND $valuation_date AND ($segment IS NULL OR p.segment = $segment)
),
per_area AS (
    SELECT *, sale_price / area AS ppa FROM w WHERE n_parcels = 1 AND area > 0
),
medians AS (
    SELECT segment, median(ppa) AS median_ppa FROM per_area
    WHERE NOT $prepared OR coalesce(qualified, false) GROUP BY segment
),
names AS (
    SELECT max(name) FILTER (WHERE position = $area) AS area, max(name) FILTER (WHERE position = $year) AS year
    FROM features
),
outcome AS (   -- what the sales step made of each repeated sale, as a clause
    SELECT *, CASE WHEN qualified IS NULL THEN '' WHEN qualified THEN ' (sales step: qualified)'
                   ELSE ' (sales step: ' || reason || ')' END AS said,
           count(DISTINCT sale_date) OVER (PARTITION BY parcel_id) AS n_days,
           string_agg(sale_id, ', ' ORDER BY sale_id) OVER (PARTITION BY parcel_id, sale_date) AS same_day_ids,
           count(DISTINCT sale_price) OVER (PARTITION BY parcel_id, sale_date) AS same_day_prices,
           first_value(sale_id) OVER (PARTITION BY parcel_id ORDER BY latest DESC) AS latest_id,
           max(sale_date) OVER (PARTITION BY parcel_id) AS latest_date
    FROM repeat_sales WHERE $segment IS NULL OR segment = $segment
)
SELECT w.segment, w.parcel_id, w.sale_id, 'built_after_sale', n.year, check_value('continuous', NULL, w.year),
       'built in ' || check_value('continuous', NULL, w.year) || ', after this sale on '
       || strftime(w.sale_date, '%Y-%m-%d') || ': the price was paid for the land or an earlier building'
FROM w, names n WHERE w.year > year(w.sale_date)
UNION ALL
SELECT a.segment, a.parcel_id, a.sale_id, 'price_per_area', n.area, check_value('continuous', NULL, a.area),
       'price ' || check_number(a.sale_price) || ' is ' || check_number(a.ppa) || ' per unit of living area, '
       || format(CASE WHEN a.ppa < m.median_ppa THEN '{:.2f}' ELSE '{:.1f}' END, a.ppa / m.median_ppa)
       || ' times the segment''s median of '
       || check_number(m.median_ppa) || ': a keyed price or living area, or not a market sale?'
FROM per_area a JOIN medians m USING (segment), names n
WHERE a.ppa > m.median_ppa * $area_factor OR a.ppa < m.median_ppa / $area_factor
UNION ALL
SELECT segment, parcel_id, sale_id, 'price_vs_prior', NULL, check_value('continuous', NULL, sale_price),
       'price ' || check_number(sale_price) || ' is ' || format('{:.2f}', sale_price / prior_value)
       || ' times the prior value of ' || check_number(prior_value)
       || ': a keyed price, not a market sale, or a parcel that changed?'
FROM w
WHERE n_parcels = 1 AND prior_value > 0
  AND (sale_price > prior_value * $prior_factor OR sale_price < prior_value / $prior_factor)
UNION ALL
SELECT segment, parcel_id, sale_id, 'duplicate_sale', NULL, strftime(sale_date, '%Y-%m-%d'),
       'one of ' || n_same_day || ' sales of this parcel on ' || strftime(sale_date, '%Y-%m-%d') || ' ('
       || same_day_ids || CASE WHEN same_day_prices = 1 THEN ', same price' ELSE ', different prices' END
       || '): a sale keyed twice?' || said
FROM outcome WHERE n_same_day > 1
UNION ALL
SELECT segment, parcel_id, sale_id, 'repeat_sale', NULL, strftime(sale_date, '%Y-%m-%d'),
       CASE WHEN latest THEN 'the latest of ' || n_sales || ' sales of this parcel in the sale window'
            ELSE 'an earlier sale of this parcel; the latest in the sale window is ' || latest_id || ' on '
                 || strftime(latest_date, '%Y-%m-%d') END || said
FROM outcome WHERE n_days > 1;
