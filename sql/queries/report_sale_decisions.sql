-- The analyst's decisions on single sales.
SELECT sale_id, decision, reason, decided_at, who FROM sale_decisions ORDER BY decided_at, sale_id;
