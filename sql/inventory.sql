-- The ranked inventory: one row per deficient stretch and direction of travel.
-- Needs the views of evaluate.sql, `hazards` (road_id, curve_no, direction, hidden_from_m,
-- hidden_to_m, hidden_hazard, hazard_chainage_m, hazard_detail: what each crest hides, each
-- way) and `params` with:
--   band_minor_kmh, band_severe_kmh   speed gap (speed judged at minus supported speed) limits
--   w_shortfall, w_speed, w_exposure  weights of the priority score
--   aadt_ref                          AADT at which the exposure factor reaches 1
--   hazard_weight                     x 100 points added where the crest hides a hazard
--   recon_gap_kmh, recon_aadt         TRB Special Report 214 thresholds for the treatment hint
-- A stretch is a run of consecutive deficient stations (no more than 1.5 steps apart) whose
-- sight is limited by the same curve, in one direction. from_m < to_m always.
-- Priority score: 100 * hazard_weight * (a hazard is hidden)
--   + 100 * (w_shortfall * f_shortfall + w_speed * f_speed + w_exposure * f_exposure)
--         / (w_shortfall + w_speed + w_exposure), where
--   f_shortfall = shortfall / required SSD (at most 1),
--   f_speed     = speed gap / 50 km/h (at most 1),
--   f_exposure  = ln(1 + AADT) / ln(1 + aadt_ref) (at most 1; 0 where AADT is unknown).
-- With the default weight a stretch hiding a hazard (Harwood & Bauer 2015, TRR 2486) ranks
-- above every stretch that hides none. Rank 1 is the highest score (ties: larger shortfall
-- first, then road and chainage). Stretches of curves whose verdict is 'undetermined' (the ground
-- data cannot decide; see evaluate.sql) are listed after every deficient one, with their verdict.

CREATE OR REPLACE TEMP VIEW stretches AS
WITH flagged AS (
    SELECT v.*,
           CASE WHEN chainage_m - lag(chainage_m) OVER w > 1.5 * p.step_m
                     OR lag(chainage_m) OVER w IS NULL THEN 1 ELSE 0 END AS starts
    FROM station_verdict v
    CROSS JOIN params p
    WHERE v.short
    WINDOW w AS (PARTITION BY road_id, direction, curve_no ORDER BY chainage_m)
), numbered AS (
    SELECT *, sum(starts) OVER (PARTITION BY road_id, direction, curve_no ORDER BY chainage_m) AS stretch_no
    FROM flagged
)
SELECT road_id, direction, curve_no, stretch_no,
       min(chainage_m) AS from_m, max(chainage_m) AS to_m,
       min(sight_m) AS sight_available_m,
       max(ssd_required_m) AS ssd_required_m,
       arg_min(supported_speed_kmh, sight_m) AS supported_speed_kmh,
       arg_min(speed_kmh, sight_m) AS speed_kmh,
       arg_min(limit_kind, sight_m) AS limit_kind,
       count(*) AS stations
FROM numbered
GROUP BY road_id, direction, curve_no, stretch_no;

CREATE OR REPLACE TEMP TABLE inventory AS
WITH scored AS (
    SELECT s.road_id, s.curve_no,
           coalesce(c.kind, CASE s.limit_kind WHEN 'line of sight' THEN 'crest' ELSE 'sag' END) AS kind,
           s.direction, s.from_m, s.to_m,
           s.speed_kmh, s.supported_speed_kmh, s.ssd_required_m, s.sight_available_m,
           s.ssd_required_m - s.sight_available_m AS shortfall_m,
           c.k, c.k_required, rr.aadt,
           s.speed_kmh - s.supported_speed_kmh AS speed_gap_kmh,
           s.to_m - s.from_m AS stretch_length_m,
           rr.name AS road_name, rr.road_class, rr.speed_basis,
           c.a_pct, c.length_m AS curve_length_m, c.pvi_m, c.confidence, s.limit_kind,
           coalesce(c.verdict, 'deficient') AS verdict, c.p_deficient, c.to_settle,
           coalesce(h.hidden_hazard, 'none') AS hidden_hazard, h.hazard_chainage_m, h.hazard_detail,
           h.hidden_from_m, h.hidden_to_m,
           least((s.ssd_required_m - s.sight_available_m) / s.ssd_required_m, 1.0) AS f_shortfall,
           least(greatest(s.speed_kmh - s.supported_speed_kmh, 0) / 50.0, 1.0) AS f_speed,
           CASE WHEN rr.aadt IS NULL OR isnan(rr.aadt) THEN 0.0
                ELSE least(ln(1 + rr.aadt) / ln(1 + p.aadt_ref), 1.0) END AS f_exposure,
           p.*
    FROM stretches s
    JOIN road_req rr USING (road_id)
    LEFT JOIN curve_eval c USING (road_id, curve_no)
    LEFT JOIN hazards h USING (road_id, curve_no, direction)
    CROSS JOIN params p
)
SELECT row_number() OVER (ORDER BY verdict = 'deficient' DESC, priority_score DESC, shortfall_m DESC, road_id,
                                   from_m, direction) AS rank,
       road_id, curve_no, kind, direction, from_m, to_m, speed_kmh, supported_speed_kmh,
       ssd_required_m, sight_available_m, shortfall_m, k, k_required, aadt, priority_score,
       severity, hidden_hazard, hazard_chainage_m, hazard_detail, hidden_from_m, hidden_to_m,
       treatment_hint, speed_gap_kmh, stretch_length_m, road_name, road_class, speed_basis,
       a_pct, curve_length_m, pvi_m, verdict, p_deficient, confidence, to_settle, limit_kind,
       f_shortfall, f_speed, f_exposure
FROM (
    SELECT *,
           100.0 * hazard_weight * (hidden_hazard <> 'none')::DOUBLE
           + 100.0 * (w_shortfall * f_shortfall + w_speed * f_speed + w_exposure * f_exposure)
                 / (w_shortfall + w_speed + w_exposure) AS priority_score,
           CASE WHEN speed_gap_kmh < band_minor_kmh THEN 'minor'
                WHEN speed_gap_kmh <= band_severe_kmh THEN 'moderate'
                ELSE 'severe' END AS severity,
           -- TRB Special Report 214 (1987) 3R guidance, thresholds from memory (settings)
           CASE WHEN kind = 'crest' AND hidden_hazard <> 'none' AND speed_gap_kmh > recon_gap_kmh
                     AND coalesce(aadt, 0) > recon_aadt
                THEN 'consider reconstructing the crest (hidden hazard, supported speed more than '
                     || round(recon_gap_kmh)::INTEGER || ' km/h below the speed judged at, AADT over '
                     || round(recon_aadt)::INTEGER || '; TRB SR 214)'
                WHEN kind = 'crest' AND hidden_hazard IN ('junction', 'both')
                THEN 'lower-cost measures: warn of the hidden junction or access, remove or relocate it, manage speed'
                WHEN kind = 'crest' AND hidden_hazard = 'horizontal curve'
                THEN 'lower-cost measures: advance curve warning and chevrons, speed advisory'
                WHEN kind = 'crest'
                THEN 'lower-cost measures: limited sight distance warning signs, speed management'
                ELSE 'lower-cost measures: lighting or delineation through the sag, speed management'
           END AS treatment_hint
    FROM scored
)
ORDER BY rank;
