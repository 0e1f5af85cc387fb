-- Network summary by road class (and a 'network' total row): km audited, curves found,
-- deficient curves, and deficient length by severity (directional km: a stretch short in both
-- directions counts twice). Needs the views of evaluate.sql and inventory.sql.
WITH classes AS (
    SELECT coalesce(road_class, '(no class)') AS road_class, road_id, length_m, status FROM roads
), per_class AS (
    SELECT road_class,
           count(*) AS roads_in,
           count(*) FILTER (WHERE status = 'evaluated') AS roads_evaluated,
           sum(length_m) FILTER (WHERE status = 'evaluated') / 1000.0 AS km_audited
    FROM classes GROUP BY road_class
), curve_counts AS (
    SELECT coalesce(rr.road_class, '(no class)') AS road_class,
           count(*) AS curves,
           count(*) FILTER (WHERE c.kind = 'crest') AS crests,
           count(*) FILTER (WHERE c.kind = 'sag') AS sags,
           count(*) FILTER (WHERE c.deficient) AS deficient_curves,
           count(*) FILTER (WHERE c.verdict = 'undetermined') AS undetermined_curves,
           count(*) FILTER (WHERE c.confidence = 'high') AS high_confidence_curves
    FROM curve_eval c JOIN road_req rr USING (road_id)
    GROUP BY 1
), deficient_km AS (
    SELECT coalesce(road_class, '(no class)') AS road_class,
           sum(stretch_length_m) FILTER (WHERE severity = 'minor') / 1000.0 AS km_minor,
           sum(stretch_length_m) FILTER (WHERE severity = 'moderate') / 1000.0 AS km_moderate,
           sum(stretch_length_m) FILTER (WHERE severity = 'severe') / 1000.0 AS km_severe,
           count(*) AS deficient_stretches
    FROM inventory WHERE verdict = 'deficient' GROUP BY 1
), rows AS (
    SELECT p.road_class, p.roads_in, p.roads_evaluated, coalesce(p.km_audited, 0) AS km_audited,
           coalesce(c.curves, 0) AS curves, coalesce(c.crests, 0) AS crests, coalesce(c.sags, 0) AS sags,
           coalesce(c.deficient_curves, 0) AS deficient_curves,
           coalesce(c.undetermined_curves, 0) AS undetermined_curves,
           coalesce(c.high_confidence_curves, 0) AS high_confidence_curves,
           coalesce(d.deficient_stretches, 0) AS deficient_stretches,
           coalesce(d.km_minor, 0) AS deficient_km_minor,
           coalesce(d.km_moderate, 0) AS deficient_km_moderate,
           coalesce(d.km_severe, 0) AS deficient_km_severe
    FROM per_class p
    LEFT JOIN curve_counts c USING (road_class)
    LEFT JOIN deficient_km d USING (road_class)
)
SELECT * FROM rows
UNION ALL
SELECT 'network', sum(roads_in), sum(roads_evaluated), sum(km_audited), sum(curves), sum(crests), sum(sags),
       sum(deficient_curves), sum(undetermined_curves), sum(high_confidence_curves), sum(deficient_stretches), sum(deficient_km_minor), sum(deficient_km_moderate),
       sum(deficient_km_severe)
FROM rows
ORDER BY road_class = 'network', road_class;
