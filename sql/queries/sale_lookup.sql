-- One sale's parcels with their segment, qualification and the analyst's decision. $1 sale id.
SELECT s.sale_id, s.parcel_id, p.segment, s.sale_date, s.sale_price, q.qualified, q.reason AS qualification,
       d.decision, d.reason AS decision_reason
FROM sales s
JOIN parcels p USING (parcel_id)
LEFT JOIN sale_qualification q USING (sale_id, parcel_id)
LEFT JOIN sale_decisions d ON d.sale_id = s.sale_id
WHERE s.sale_id = $1
ORDER BY s.parcel_id;
