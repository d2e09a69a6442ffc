-- The imported features in position order.
SELECT position, name, kind, log, levels, range_lo, range_hi FROM features ORDER BY position;
