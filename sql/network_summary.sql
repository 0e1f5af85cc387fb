-- Network summary by road class: roads and kilometres in and evaluated, and how much of the
-- evaluated length has measured ground data.
-- Inputs (registered by pipeline/sqlrun.py):
--   roads(road_id, road_class, length_m, status)
--   stations(road_id, chainage_m, ground_flag)      one row per profile station
WITH per_road AS (
    SELECT road_id,
           count(*)                                            AS stations,
           count(*) FILTER (WHERE ground_flag = 'measured')    AS measured,
           count(*) FILTER (WHERE ground_flag = 'filled')      AS filled,
           count(*) FILTER (WHERE ground_flag = 'missing')     AS missing
    FROM stations
    GROUP BY road_id
)
SELECT coalesce(r.road_class, '(no class)')                               AS road_class,
       count(*)                                                           AS roads_in,
       count(*) FILTER (WHERE r.status = 'evaluated')                     AS roads_evaluated,
       round(coalesce(sum(r.length_m), 0) / 1000.0, 3)                    AS km_in,
       round(coalesce(sum(r.length_m) FILTER (WHERE r.status = 'evaluated'), 0) / 1000.0, 3)
                                                                          AS km_evaluated,
       round(100.0 * coalesce(sum(p.measured), 0) / greatest(coalesce(sum(p.stations), 0), 1), 1)
                                                                          AS ground_measured_pct,
       round(100.0 * coalesce(sum(p.filled), 0) / greatest(coalesce(sum(p.stations), 0), 1), 1)
                                                                          AS ground_filled_pct,
       round(100.0 * coalesce(sum(p.missing), 0) / greatest(coalesce(sum(p.stations), 0), 1), 1)
                                                                          AS ground_missing_pct
FROM roads r
LEFT JOIN per_road p USING (road_id)
GROUP BY 1
ORDER BY 1;
