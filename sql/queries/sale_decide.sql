-- Record the analyst's latest decision on a sale. $1 sale id, $2 'exclude' | 'include', $3 reason, $4 time, $5 who.
INSERT OR REPLACE INTO sale_decisions VALUES ($1, $2, $3, $4, $5);
