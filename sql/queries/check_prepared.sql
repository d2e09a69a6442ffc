-- Whether the sales step has run on the imported sales: qualified sales are stored and every sale has its
-- qualification (a re-import since then leaves new sales without one).
SELECT EXISTS (SELECT 1 FROM adjusted_sales)
       AND NOT EXISTS (SELECT 1 FROM sales s LEFT JOIN sale_qualification q USING (sale_id, parcel_id)
                       WHERE q.sale_id IS NULL);
