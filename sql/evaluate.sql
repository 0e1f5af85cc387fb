-- Judge every station (both directions) and every curve against the criteria set.
-- Inputs (registered by pipeline/evaluate.py):
--   roads(road_id, name, road_class, aadt, speed_kmh, speed_basis, length_m, status)
--   profiles(road_id, chainage_m, grade_pct, sight_fwd_m, sight_back_m, limit_fwd, limit_back,
--            curve_fwd, curve_back, speed_fwd_kmh, speed_back_kmh)   one row per station
--   keypoints(road_id, chainage_m, direction, sight_m, limit_kind, curve_no, grade, speed_kmh)
--       each curve seen from its PVC looking ahead and from its PVT looking back
--   curves(road_id, curve_no, kind, pvc_m, pvt_m, a_pct, length_m, k, judged, ...)
--   cset      the selected criteria set (one row) with length_to_m and speed_to_kmh
--   cspeeds   its table of speeds (speed, ssd_design, crest_k, sag_k)
--   params    one row: grade_adjusted (bool), step_m
-- Rules:
--   Each station is judged at its own speed in each direction (the road's speed, or the
--   predicted operating speed there where the road's speed is predicted).
--   required SSD: at a tabulated speed the table's design SSD; between rows the calculated
--   SSD rounded up to the set's step. With grade_adjusted, the calculated SSD on the grade of
--   the station in the direction of travel, rounded up (the tables are for level roads).
--   A station is deficient where its sight distance is limited by a curve (line of sight or
--   headlight) and falls below the required SSD. A curve whose zone is mostly without usable
--   ground data (judged = false) gets no verdict: its stations are never deficient.
-- The stations' verdicts, the curves and the inventory are kept as tables once made: as views,
-- every later statement reading them would compute them again (three times over for the summary).

-- one row per station and direction of travel ('increasing' / 'decreasing' chainage), grade
-- in the direction of travel (fraction), plus the curves' key points
CREATE OR REPLACE TEMP VIEW stations AS
SELECT road_id, chainage_m, 'increasing' AS direction, sight_fwd_m AS sight_m, limit_fwd AS limit_kind,
       curve_fwd AS curve_no, grade_pct / 100.0 AS grade, speed_fwd_kmh AS speed_kmh, false AS is_key
FROM profiles
UNION ALL
SELECT road_id, chainage_m, 'decreasing', sight_back_m, limit_back, curve_back, -grade_pct / 100.0,
       speed_back_kmh, false
FROM profiles
UNION ALL
SELECT road_id, chainage_m, direction, sight_m, limit_kind, curve_no, grade, speed_kmh, true
FROM keypoints;

CREATE OR REPLACE TEMP VIEW road_req AS
SELECT r.*
FROM roads r
WHERE r.status = 'evaluated';

-- design values at a speed (km/h): the table's where tabulated, else the rule
CREATE OR REPLACE TEMP VIEW station_eval AS
WITH s AS (
    SELECT s.*, s.speed_kmh / c.speed_to_kmh AS v_set
    FROM stations s
    JOIN road_req USING (road_id)
    CROSS JOIN cset c
    WHERE s.sight_m IS NOT NULL AND NOT isnan(s.sight_m)
)
SELECT s.road_id, s.chainage_m, s.direction, s.sight_m, s.limit_kind, s.curve_no, s.grade, s.is_key,
       s.speed_kmh,
       CASE WHEN p.grade_adjusted THEN
                round_up(ssd_on_grade(s.v_set, c.reaction_time_s, c.deceleration, s.grade, c.gravity,
                                      c.speed_coef, c.grade_coef), c.rounding_step) * c.length_to_m
            ELSE coalesce(t.ssd_design, round_up(ssd_level(s.v_set, c.reaction_time_s, c.deceleration,
                                                           c.speed_coef, c.braking_coef), c.rounding_step))
                 * c.length_to_m END AS ssd_required_m,
       -- the speed whose calculated SSD this sight distance meets (set's formula, same grade rule)
       speed_for_sight(s.sight_m / c.length_to_m, c.speed_coef * c.reaction_time_s,
                       CASE WHEN p.grade_adjusted
                            THEN 1.0 / (c.grade_coef * (c.deceleration / c.gravity + s.grade))
                            ELSE c.braking_coef / c.deceleration END) * c.speed_to_kmh
           AS supported_speed_kmh
FROM s
CROSS JOIN cset c
CROSS JOIN params p
LEFT JOIN cspeeds t ON abs(t.speed - s.v_set) < 1e-6;

CREATE OR REPLACE TEMP TABLE station_verdict AS
SELECT e.*,
       (e.limit_kind IN ('line of sight', 'headlight') AND e.sight_m < e.ssd_required_m - 1e-9
        AND coalesce(c.judged, true)) AS short
FROM station_eval e
LEFT JOIN curves c ON c.road_id = e.road_id AND c.curve_no = e.curve_no;

-- one row per curve: its available sight distance (smallest over the stations whose sight it
-- limits, in either direction; where it limits none, the smallest over its own span), the
-- requirement at the speed judged there, the verdict, the speed it supports and the K check
CREATE OR REPLACE TEMP TABLE curve_eval AS
WITH limited AS (
    SELECT road_id, curve_no,
           min(sight_m) AS sight_min_m,
           min(sight_m) FILTER (WHERE direction = 'increasing') AS sight_increasing_m,
           min(sight_m) FILTER (WHERE direction = 'decreasing') AS sight_decreasing_m,
           max(ssd_required_m) AS ssd_required_m,
           bool_or(short) AS deficient,
           arg_min(supported_speed_kmh, sight_m - ssd_required_m) AS supported_speed_kmh,
           max(speed_kmh) AS speed_kmh
    FROM station_verdict
    WHERE curve_no > 0
    GROUP BY road_id, curve_no
), span AS (
    SELECT c.road_id, c.curve_no, min(s.sight_m) AS sight_span_m, max(s.ssd_required_m) AS ssd_span_m,
           max(s.speed_kmh) AS speed_span_kmh
    FROM curves c
    JOIN station_verdict s ON s.road_id = c.road_id AND NOT s.is_key
         AND s.chainage_m BETWEEN c.pvc_m AND c.pvt_m
    GROUP BY c.road_id, c.curve_no
), judged AS (
    SELECT c.*,
           coalesce(l.sight_min_m, sp.sight_span_m) AS sight_available_m,
           l.sight_increasing_m, l.sight_decreasing_m,
           coalesce(l.ssd_required_m, sp.ssd_span_m) AS ssd_required_m,
           coalesce(l.speed_kmh, sp.speed_span_kmh, rr.speed_kmh) AS speed_kmh,
           coalesce(l.deficient, false) AS deficient,
           CASE WHEN l.curve_no IS NULL THEN 'none within the look-ahead' ELSE 'this curve' END
               AS sight_limited_by,
           l.supported_speed_kmh  -- empty where the curve limits no sight distance
    FROM curves c
    JOIN road_req rr USING (road_id)
    LEFT JOIN limited l USING (road_id, curve_no)
    LEFT JOIN span sp USING (road_id, curve_no)
), k_at AS (
    SELECT j.road_id, j.curve_no, j.speed_kmh / cs.speed_to_kmh AS v_set,
           coalesce(t.ssd_design, round_up(ssd_level(j.speed_kmh / cs.speed_to_kmh, cs.reaction_time_s,
                                                     cs.deceleration, cs.speed_coef, cs.braking_coef),
                                           cs.rounding_step)) AS ssd_design_set,
           t.crest_k AS crest_k_table, t.sag_k AS sag_k_table
    FROM judged j
    CROSS JOIN cset cs
    LEFT JOIN cspeeds t ON abs(t.speed - j.speed_kmh / cs.speed_to_kmh) < 1e-6
), with_k AS (
    SELECT j.*,
           CASE j.kind
                WHEN 'crest' THEN coalesce(k.crest_k_table, k_round(pow(k.ssd_design_set, 2) / cs.crest_k_const))
                ELSE coalesce(k.sag_k_table,
                     k_round(pow(k.ssd_design_set, 2) / (cs.sag_k_const + cs.sag_k_per_s * k.ssd_design_set)))
           END * cs.length_to_m AS k_required,
           -- probability that the sight distance over the curve is below the requirement, from
           -- the standard deviation the fit gives it (pipeline/uncertainty.py)
           CASE WHEN j.sight_sd_m > 0 AND isfinite(j.sight_sd_m)
                THEN normal_cdf((coalesce(j.ssd_required_m, 0) - j.sight_available_m) / j.sight_sd_m)
                WHEN j.sight_sd_m > 0 THEN 0.5
                ELSE (j.deficient)::DOUBLE END AS p_deficient
    FROM judged j
    JOIN k_at k USING (road_id, curve_no)
    CROSS JOIN cset cs
), decided AS (
    -- the verdict: deficient where the probability of a shortfall is at least p_verdict, adequate
    -- only where it is at most p_adequate (smaller: a wrong 'adequate' is the costlier error);
    -- a grade change the data barely show (significance = A / sd of A) is never judged deficient
    SELECT w.*,
           CASE WHEN NOT w.judged THEN 'undetermined'
                -- cells this coarse mix the road with the land beside it at the scale of the
                -- curves: no curve is judged on them
                WHEN coalesce(w.ground_spacing_m, 0) > p.max_cell_for_verdict_m THEN 'undetermined'
                WHEN w.p_deficient <= p.p_adequate THEN 'adequate'
                WHEN coalesce(w.significance, 0) < p.min_significance THEN 'undetermined'
                WHEN w.p_deficient >= p.p_verdict THEN 'deficient'
                ELSE 'undetermined' END AS verdict
    FROM with_k w
    CROSS JOIN params p
)
SELECT d.* EXCLUDE (deficient, confidence),
       d.verdict = 'deficient' AS deficient,
       d.confidence AS fit_confidence,
       CASE WHEN d.verdict = 'undetermined' OR d.confidence = 'low'
                 OR coalesce(d.significance, 0) < p.min_significance THEN 'low'
            WHEN d.confidence = 'high' AND d.significance >= p.high_significance
                 AND (d.p_deficient >= p.p_high OR d.p_deficient <= 1 - p.p_high) THEN 'high'
            ELSE 'medium' END AS confidence,
       CASE WHEN d.verdict <> 'undetermined' THEN NULL
            WHEN NOT d.judged THEN 'ground data over the whole curve: a DEM without gaps there, or a survey'
            WHEN coalesce(d.ground_spacing_m, 0) > p.max_cell_for_verdict_m
                THEN 'a DEM of 2 m or finer (LiDAR), or a survey: no curve is judged on cells this coarse'
            WHEN d.resolution_m > p.fine_resolution_m
                THEN 'a DEM of 2 m or finer (LiDAR), or a survey of the curve'
            ELSE 'a survey of the curve: its sight distance is within the ground data''s error of the requirement'
       END AS to_settle
FROM decided d
CROSS JOIN params p;
