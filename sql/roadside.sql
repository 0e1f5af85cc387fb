-- Roadside deficiencies from the 3D sight lines, added to the ranked inventory.
-- Needs the views of evaluate.sql and inventory.sql, and:
--   profiles(..., sight_3d_fwd_m, sight_3d_fwd_limit, sight_3d_back_m, sight_3d_back_limit)
--   hcurves(road_id, hcurve_no, start_m, end_m, ...)            the horizontal curves
--   clearances(road_id, direction, from_m, to_m, clear_area_m2, clear_volume_m3, ...)
--       what to clear on each stretch found short by the 3D stage
--   params(step_m, weights, bands, aadt_ref, max_cell_for_verdict_m, fine_resolution_m)
-- Rules:
--   A station is short in 3D where its 3D sight along the lane, limited by roadside terrain or
--   a roadside object (not the crest of the road itself), is below the required SSD, while its
--   2D sight is not (the 2D profile does not already explain the shortfall; those stations
--   are in the inventory already). A stretch is a run of such stations no more than 1.5 steps
--   apart, in one direction. Its horizontal curve is the one overlapping most the span of the
--   required sight lines (from the first driver position to the required SSD beyond the last).
--   The speed the sight supports, the shortfall, severity and priority score follow the rules
--   of inventory.sql; no hazard is looked for (the hazards are those hidden beyond crests).
--   Verdict: on DEM cells coarser than max_cell_for_verdict_m 'undetermined', as for the curves;
--   confidence 'medium' on cells no coarser than fine_resolution_m, else 'low' (a coarse DEM
--   blurs cuts and banks).

CREATE OR REPLACE TEMP VIEW station_3d AS
WITH s3 AS (
    SELECT road_id, chainage_m, 'increasing' AS direction, sight_3d_fwd_m AS sight_3d_m,
           sight_3d_fwd_limit AS limit_3d
    FROM profiles
    UNION ALL
    SELECT road_id, chainage_m, 'decreasing', sight_3d_back_m, sight_3d_back_limit
    FROM profiles
)
SELECT v.road_id, v.chainage_m, v.direction, v.speed_kmh, v.ssd_required_m, v.sight_m, s3.sight_3d_m,
       s3.limit_3d,
       speed_for_sight(s3.sight_3d_m / c.length_to_m, c.speed_coef * c.reaction_time_s,
                       CASE WHEN p.grade_adjusted
                            THEN 1.0 / (c.grade_coef * (c.deceleration / c.gravity + v.grade))
                            ELSE c.braking_coef / c.deceleration END) * c.speed_to_kmh AS supported_speed_kmh,
       (s3.limit_3d IN ('roadside terrain', 'roadside object')
        AND s3.sight_3d_m < v.ssd_required_m - 1e-9
        AND NOT (v.sight_m < v.ssd_required_m - 1e-9)) AS short_3d
FROM station_verdict v
JOIN s3 USING (road_id, chainage_m, direction)
CROSS JOIN cset c
CROSS JOIN params p
WHERE NOT v.is_key AND s3.sight_3d_m IS NOT NULL AND NOT isnan(s3.sight_3d_m);

CREATE OR REPLACE TEMP VIEW roadside_stretches AS
WITH flagged AS (
    SELECT s.*,
           CASE WHEN chainage_m - lag(chainage_m) OVER w > 1.5 * p.step_m
                     OR lag(chainage_m) OVER w IS NULL THEN 1 ELSE 0 END AS starts
    FROM station_3d s
    CROSS JOIN params p
    WHERE s.short_3d
    WINDOW w AS (PARTITION BY road_id, direction ORDER BY chainage_m)
), numbered AS (
    SELECT *, sum(starts) OVER (PARTITION BY road_id, direction ORDER BY chainage_m) AS stretch_no
    FROM flagged
)
SELECT road_id, direction, stretch_no,
       min(chainage_m) AS from_m, max(chainage_m) AS to_m,
       min(sight_3d_m) AS sight_available_m,
       max(ssd_required_m) AS ssd_required_m,
       arg_min(supported_speed_kmh, sight_3d_m) AS supported_speed_kmh,
       arg_min(speed_kmh, sight_3d_m) AS speed_kmh,
       arg_min(limit_3d, sight_3d_m) AS limit_kind,
       count(*) AS stations
FROM numbered
GROUP BY road_id, direction, stretch_no;

CREATE OR REPLACE TEMP VIEW roadside_hcurve AS
WITH spans AS (
    SELECT road_id, direction, stretch_no,
           CASE WHEN direction = 'increasing' THEN from_m ELSE from_m - ssd_required_m END AS lo_m,
           CASE WHEN direction = 'increasing' THEN to_m + ssd_required_m ELSE to_m END AS hi_m
    FROM roadside_stretches
), crossing AS (
    SELECT s.road_id, s.direction, s.stretch_no, h.hcurve_no,
           least(h.end_m, s.hi_m) - greatest(h.start_m, s.lo_m) AS overlap_m
    FROM spans s
    JOIN hcurves h ON h.road_id = s.road_id AND h.end_m > s.lo_m AND h.start_m < s.hi_m
)
SELECT road_id, direction, stretch_no, arg_max(hcurve_no, overlap_m) AS hcurve_no
FROM crossing
GROUP BY road_id, direction, stretch_no;

CREATE OR REPLACE TEMP VIEW roadside_clear AS
SELECT s.road_id, s.direction, s.stretch_no,
       sum(c.clear_area_m2) AS clear_area_m2, sum(c.clear_volume_m3) AS clear_volume_m3
FROM roadside_stretches s
CROSS JOIN params p
JOIN clearances c ON c.road_id = s.road_id AND c.direction = s.direction
     AND c.from_m <= s.to_m + 0.5 * p.step_m AND c.to_m >= s.from_m - 0.5 * p.step_m
GROUP BY s.road_id, s.direction, s.stretch_no;

CREATE OR REPLACE TEMP VIEW roadside AS
WITH scored AS (
    SELECT s.road_id, s.direction, s.from_m, s.to_m, s.speed_kmh, s.supported_speed_kmh, s.ssd_required_m,
           s.sight_available_m, s.ssd_required_m - s.sight_available_m AS shortfall_m, rr.aadt,
           s.speed_kmh - s.supported_speed_kmh AS speed_gap_kmh, s.to_m - s.from_m AS stretch_length_m,
           rr.name AS road_name, rr.road_class, rr.speed_basis, s.limit_kind,
           CASE WHEN coalesce(rr.ground_spacing_m, 0) > p.max_cell_for_verdict_m THEN 'undetermined'
                ELSE 'deficient' END AS verdict,
           CASE WHEN coalesce(rr.ground_spacing_m, 0) <= p.fine_resolution_m THEN 'medium' ELSE 'low' END
               AS confidence,
           CASE WHEN coalesce(rr.ground_spacing_m, 0) > p.max_cell_for_verdict_m
                THEN 'a DEM of 2 m or finer (LiDAR), or a survey of the roadside inside the curve' END AS to_settle,
           coalesce(hc.hcurve_no, 0) AS hcurve_no, cl.clear_area_m2, cl.clear_volume_m3,
           least((s.ssd_required_m - s.sight_available_m) / s.ssd_required_m, 1.0) AS f_shortfall,
           least(greatest(s.speed_kmh - s.supported_speed_kmh, 0) / 50.0, 1.0) AS f_speed,
           CASE WHEN rr.aadt IS NULL OR isnan(rr.aadt) THEN 0.0
                ELSE least(ln(1 + rr.aadt) / ln(1 + p.aadt_ref), 1.0) END AS f_exposure,
           p.*
    FROM roadside_stretches s
    JOIN road_req rr USING (road_id)
    LEFT JOIN roadside_hcurve hc USING (road_id, direction, stretch_no)
    LEFT JOIN roadside_clear cl USING (road_id, direction, stretch_no)
    CROSS JOIN params p
)
SELECT road_id, NULL::BIGINT AS curve_no, 'roadside' AS kind, direction, from_m, to_m, speed_kmh,
       supported_speed_kmh, ssd_required_m, sight_available_m, shortfall_m, NULL::DOUBLE AS k,
       NULL::DOUBLE AS k_required, aadt,
       100.0 * (w_shortfall * f_shortfall + w_speed * f_speed + w_exposure * f_exposure)
           / (w_shortfall + w_speed + w_exposure) AS priority_score,
       CASE WHEN speed_gap_kmh < band_minor_kmh THEN 'minor'
            WHEN speed_gap_kmh <= band_severe_kmh THEN 'moderate'
            ELSE 'severe' END AS severity,
       'none' AS hidden_hazard, NULL::DOUBLE AS hazard_chainage_m, NULL AS hazard_detail,
       NULL::DOUBLE AS hidden_from_m, NULL::DOUBLE AS hidden_to_m,
       CASE WHEN limit_kind = 'roadside object'
            THEN 'clear the trees or objects inside the sight lines ('
                 || coalesce(round(clear_area_m2)::BIGINT::VARCHAR, '?') || ' m², see sight_clearance in audit.gpkg); '
                 || 'else an advisory speed'
            ELSE 'cut back the bank inside the sight lines ('
                 || coalesce(round(clear_area_m2)::BIGINT::VARCHAR, '?') || ' m², about '
                 || coalesce(round(clear_volume_m3)::BIGINT::VARCHAR, '?') || ' m³, see sight_clearance in audit.gpkg); '
                 || 'else an advisory speed'
       END AS treatment_hint,
       speed_gap_kmh, stretch_length_m, road_name, road_class, speed_basis,
       NULL::DOUBLE AS a_pct, NULL::DOUBLE AS curve_length_m, NULL::DOUBLE AS pvi_m, verdict,
       NULL::DOUBLE AS p_deficient, confidence, to_settle, limit_kind, f_shortfall, f_speed, f_exposure,
       hcurve_no, clear_area_m2, clear_volume_m3
FROM scored;

-- the inventory with the roadside rows, ranked together by the rule of inventory.sql
CREATE OR REPLACE TEMP TABLE inventory_all AS
SELECT row_number() OVER (ORDER BY verdict = 'deficient' DESC, priority_score DESC, shortfall_m DESC, road_id,
                                   from_m, direction) AS rank,
       * EXCLUDE (rank)
FROM (
    SELECT *, NULL::BIGINT AS hcurve_no, NULL::DOUBLE AS clear_area_m2, NULL::DOUBLE AS clear_volume_m3
    FROM inventory
    UNION ALL BY NAME
    SELECT NULL::BIGINT AS rank, * FROM roadside
)
ORDER BY rank;
