-- Every sale of a parcel sold more than once in the sale window ($start to $valuation_date): how many sales
-- the parcel has there, how many on the same day, whether this is its latest (the one [sales] repeat_sales =
-- "latest" keeps when it passes the other rules) and what the sales step made of it (NULL before
-- `reval sales`). Kept as the temporary table repeat_sales, which `reval check` lists from too.
CREATE OR REPLACE TEMP TABLE repeat_sales AS
WITH w AS (
    SELECT s.sale_id, s.parcel_id, p.segment, s.sale_date, s.sale_price,
           count(*) OVER (PARTITION BY s.parcel_id) AS n_sales,
           count(*) OVER (PARTITION BY s.parcel_id, s.sale_date) AS n_same_day,
           row_number() OVER (PARTITION BY s.parcel_id ORDER BY s.sale_date DESC, s.sale_id DESC) = 1 AS latest
    FROM sales s JOIN parcels p USING (parcel_id)
    WHERE s.sale_date BETWEEN $start AND $valuation_date
)
SELECT w.*, q.qualified, q.reason
FROM w LEFT JOIN sale_qualification q USING (sale_id, parcel_id)
WHERE w.n_sales > 1;
SELECT * FROM repeat_sales ORDER BY segment, parcel_id, sale_date, sale_id;
