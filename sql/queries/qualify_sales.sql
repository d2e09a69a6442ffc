-- Qualify every sale by the [sales] rules; the first failing rule is the reason.
-- $1 window start, $2 valuation date, $3 kept validity codes (NULL = all), $4 exclude multi-parcel,
-- $5 property classes kept (NULL = all), $6 price min (NULL = none), $7 price max (NULL = none),
-- $8 keep only the latest sale of a parcel sold more than once ([sales] repeat_sales = "latest"),
-- $9 features a sale's parcel must have ([sales] require_features), $10 classes the model does not value
-- ([classes]: their sales neither fit the model nor judge it).
-- After the rules, the analyst's exclusions (sale_decisions); last, of the sales that pass all of these, a
-- parcel's earlier ones when it has a later one (a sale of several parcels is left out as a whole when any
-- of its parcels sold again later). Two sales of a parcel on one day: the larger sale id is kept.
INSERT INTO sale_qualification
WITH multi AS (SELECT sale_id FROM sales GROUP BY sale_id HAVING count(*) > 1),
lacking AS (
    SELECT p.parcel_id, min(f.name) AS feature
    FROM parcels p CROSS JOIN features f
    LEFT JOIN feature_values v ON v.parcel_id = p.parcel_id AND v.position = f.position
    WHERE list_contains($9::VARCHAR[], f.name) AND v.value IS NULL
    GROUP BY p.parcel_id
),
ruled AS (
    SELECT s.sale_id, s.parcel_id, s.sale_date,
           CASE
               WHEN s.sale_date < $1 THEN 'before the sale window'
               WHEN s.sale_date > $2 THEN 'after the valuation date'
               WHEN $3 IS NOT NULL AND (s.validity IS NULL OR NOT list_contains($3, s.validity))
                   THEN 'validity code ' || coalesce(s.validity, '(none)') || ' not kept'
               WHEN $4 AND s.sale_id IN (SELECT sale_id FROM multi) THEN 'multi-parcel sale'
               WHEN $5 IS NOT NULL AND NOT list_contains($5, p.property_class)
                   THEN 'property class ' || p.property_class || ' not included'
               WHEN list_contains($10::VARCHAR[], p.property_class)
                   THEN 'property class ' || p.property_class || ' not valued by the model ([classes])'
               WHEN $6 IS NOT NULL AND s.sale_price < $6 THEN 'price below the minimum'
               WHEN $7 IS NOT NULL AND s.sale_price > $7 THEN 'price above the maximum'
               WHEN l.feature IS NOT NULL THEN 'missing ' || l.feature || ' (required)'
               WHEN d.decision = 'exclude' THEN 'excluded by analyst: ' || d.reason
           END AS reason
    FROM sales s JOIN parcels p USING (parcel_id)
    LEFT JOIN sale_decisions d ON d.sale_id = s.sale_id
    LEFT JOIN lacking l ON l.parcel_id = s.parcel_id
),
ranked AS (   -- each parcel's passing sales, latest first
    SELECT sale_id, sale_date,
           row_number() OVER (PARTITION BY parcel_id ORDER BY sale_date DESC, sale_id DESC) AS nth,
           max(sale_date) OVER (PARTITION BY parcel_id) AS latest
    FROM ruled WHERE reason IS NULL AND $8
),
repeated AS (
    SELECT sale_id, bool_and(sale_date = latest) AS same_day
    FROM ranked WHERE nth > 1 GROUP BY sale_id
)
SELECT r.sale_id, r.parcel_id, reason IS NULL, reason
FROM (
    SELECT r.sale_id, r.parcel_id,
           coalesce(r.reason, CASE WHEN x.same_day THEN 'duplicate sale (same parcel and day)'
                                   WHEN x.sale_id IS NOT NULL THEN 'earlier repeat sale' END) AS reason
    FROM ruled r LEFT JOIN repeated x USING (sale_id)
) r;
