-- Implausible combinations on one parcel (common practice, no standard sets these): less living area per
-- bathroom than $min_area (area_per_bathroom), a building with no bathroom (no_bathroom: 0 often stands for
-- "unknown"), a year built after the valuation date (built_after_valuation). $area, $baths, $year: the
-- positions of the features named in [check] (NULL: that check does not run); $segment: only this segment
-- (NULL: all).
INSERT INTO check_rows
WITH wide AS (
    SELECT p.parcel_id, p.segment,
           max(v.value) FILTER (WHERE v.position = $area) AS area,
           max(v.value) FILTER (WHERE v.position = $baths) AS baths,
           max(v.value) FILTER (WHERE v.position = $year) AS year
    FROM parcels p JOIN feature_values v USING (parcel_id)
    WHERE v.position IN ($area, $baths, $year) AND ($segment IS NULL OR p.segment = $segment)
    GROUP BY p.parcel_id, p.segment
),
names AS (
    SELECT max(name) FILTER (WHERE position = $baths) AS baths, max(name) FILTER (WHERE position = $year) AS year
    FROM features
)
SELECT w.segment, w.parcel_id, NULL, 'area_per_bathroom', n.baths, check_value('continuous', NULL, w.baths),
       check_number(w.baths) || ' bathrooms in a living area of ' || check_number(w.area) || ': '
       || check_number(w.area / w.baths) || ' per bathroom, less than the ' || check_number($min_area)
       || ' of [check] min_area_per_bathroom; a keyed living area or bathroom count?'
FROM wide w, names n WHERE w.baths > 0 AND w.area / w.baths < $min_area
UNION ALL
SELECT w.segment, w.parcel_id, NULL, 'no_bathroom', n.baths, '0',
       'no bathroom in a building of ' || check_number(w.area)
       || ': if 0 stands for "unknown" here, leave the cell blank so the model fills it in'
FROM wide w, names n WHERE w.baths = 0 AND w.area > 0
UNION ALL
SELECT w.segment, w.parcel_id, NULL, 'built_after_valuation', n.year, check_value('continuous', NULL, w.year),
       'built after the valuation date (' || strftime($valuation_date::DATE, '%Y-%m-%d')
       || '): values describe the property as it stood then'
FROM wide w, names n WHERE w.year > year($valuation_date::DATE);
