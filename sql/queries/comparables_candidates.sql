-- A parcel and the sales that may be its comparables (reach: the tier the search went to), with each one's log value and contributions in a run
-- (terms in name order, so the lists line up). The subject comes first (tier -1); then qualified one-parcel
-- sales of other parcels of its property class: tier 0 its segment, 1 its market area, 2 elsewhere. The
-- search widens one tier at a time while fewer than $4 candidates are found, never beyond tier $3.
-- $1 run id, $2 parcel id, $3 widest tier, $4 widen below, $5 max age in months (NULL: any), $6 min fit weight.
WITH subject AS (
    SELECT p.parcel_id, p.segment, p.market_area, p.property_class FROM parcels p WHERE p.parcel_id = $2
),
one_parcel AS (
    SELECT sale_id FROM adjusted_sales GROUP BY sale_id HAVING count(*) = 1
),
pool AS MATERIALIZED (
    SELECT a.sale_id, a.parcel_id, p.segment, p.market_area, s.sale_date, s.sale_price, a.adjusted_price,
           -a.month_offset AS age_months,
           CASE WHEN p.segment = t.segment THEN 0 WHEN p.market_area = t.market_area THEN 1 ELSE 2 END AS tier
    FROM adjusted_sales a
    JOIN one_parcel USING (sale_id)
    JOIN sale_qualification q ON q.sale_id = a.sale_id AND q.parcel_id = a.parcel_id AND q.qualified
    JOIN sales s ON s.sale_id = a.sale_id AND s.parcel_id = a.parcel_id
    JOIN parcels p ON p.parcel_id = a.parcel_id
    CROSS JOIN subject t
    LEFT JOIN sale_weights w ON w.run_id = $1 AND w.sale_id = a.sale_id AND w.parcel_id = a.parcel_id
    WHERE a.parcel_id <> t.parcel_id AND p.property_class = t.property_class
      AND ($3 >= 2 OR p.market_area = t.market_area) AND ($3 >= 1 OR p.segment = t.segment)
      AND ($5 IS NULL OR -a.month_offset <= $5)
      AND coalesce(w.weight, 1.0) >= $6
),
reach AS (   -- the narrowest tier with enough candidates, else the widest allowed
    SELECT coalesce(min(tier) FILTER (WHERE found >= $4), $3) AS tier
    FROM (SELECT t.tier, (SELECT count(*) FROM pool WHERE pool.tier <= t.tier) AS found
          FROM (SELECT unnest(range(0, $3 + 1)) AS tier) t)
),
chosen AS (
    SELECT NULL AS sale_id, t.parcel_id, t.segment, t.market_area, NULL::DATE AS sale_date,
           NULL::DOUBLE AS sale_price, NULL::DOUBLE AS adjusted_price, NULL::DOUBLE AS age_months, -1 AS tier
    FROM subject t
    UNION ALL
    SELECT pool.* FROM pool, reach WHERE pool.tier <= reach.tier
),
parts AS (   -- only the chosen parcels' contributions are read and gathered
    SELECT parcel_id, list(term ORDER BY term) AS terms, list(contribution ORDER BY term) AS parts
    FROM parcel_contributions
    WHERE run_id = $1 AND parcel_id IN (SELECT parcel_id FROM chosen)
    GROUP BY parcel_id
)
SELECT c.sale_id, c.parcel_id, c.segment, c.market_area, c.sale_date, c.sale_price, c.adjusted_price,
       c.age_months, c.tier, reach.tier AS reach, e.log_value, pc.terms, pc.parts
FROM chosen c
CROSS JOIN reach
JOIN parcel_estimates e ON e.run_id = $1 AND e.parcel_id = c.parcel_id
JOIN parts pc ON pc.parcel_id = c.parcel_id
ORDER BY c.tier, c.sale_id;
