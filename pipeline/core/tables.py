"""Every table the audit writes or passes between its stages: each column's name, type, unit
and meaning, in one place.

The chunk files of a run (``work.*`` tables) are written with these columns and types, even
when a chunk has no rows; the output files (``curves``, ``deficiencies``, ``roads``,
``horizontal_curves``, ``data_notes``, ``profiles``) carry these columns in this order, the
workbook's header notes are these meanings, and the README's column lists are made from here
(``python -m pipeline.core.tables``; a test checks that they agree).
"""

from __future__ import annotations

import sys
from dataclasses import dataclass

import pandas as pd

_UNITS = (("_pct", "%"), ("_kmh", "km/h"), ("_deg", "degrees"), ("_m2", "m²"), ("_m3", "m³"), ("_m", "m"))
_DTYPES = {"str": object, "float": "float64", "int": "int64", "bool": "bool"}


@dataclass(frozen=True)
class Column:
    """One column of a table: its name, type (``str``, ``float``, ``int`` or ``bool``) and meaning."""

    name: str
    dtype: str
    meaning: str

    @property
    def unit(self) -> str:
        """The unit its name carries (``_m`` metres, ``_pct`` percent, ``_kmh`` km/h, ``_deg``
        degrees; K in m per %), or '' for a count, a label or a fraction."""
        if self.name in ("k", "k_required", "k_sd"):
            return "m per %"
        for suffix, unit in _UNITS:
            if self.name.endswith(suffix):
                return unit
        return ""


TABLES: dict[str, tuple[Column, ...]] = {
    "work.profiles": (
        Column('road_id', 'str', 'road identifier from the roads file'),
        Column('chainage_m', 'float', 'distance along the road from its first vertex (m)'),
        Column('x', 'float', 'easting of the station in the roads CRS'),
        Column('y', 'float', 'northing of the station in the roads CRS'),
        Column('ground_z_m', 'float', 'ground elevation read at the station (m)'),
        Column('ground_flag', 'str', 'measured, filled (short gap interpolated), masked (artefact) or missing'),
        Column('ground_offset_m', 'float', 'where across the corridor the profile was read: offset from the centreline, + left (m)'),
        Column('filter_m', 'float', 'equivalent length of the cell-crossing filter applied to the profile, 0 where none (m)'),
        Column('fitted_z_m', 'float', 'elevation of the fitted alignment (m)'),
        Column('grade_pct', 'float', 'grade of the fitted alignment, + uphill with increasing chainage (%)'),
        Column('sight_fwd_m', 'float', 'available sight distance travelling with increasing chainage (m)'),
        Column('limit_fwd', 'str', 'what limits the sight distance with increasing chainage: line of sight, headlight or look-ahead'),
        Column('curve_fwd', 'int', 'the vertical curve that limits it with increasing chainage (0 = none)'),
        Column('limit_at_fwd_m', 'float', 'chainage of the blocking or hit point, increasing direction (m)'),
        Column('sight_back_m', 'float', 'available sight distance travelling with decreasing chainage (m)'),
        Column('limit_back', 'str', 'what limits it with decreasing chainage'),
        Column('curve_back', 'int', 'the vertical curve that limits it with decreasing chainage (0 = none)'),
        Column('limit_at_back_m', 'float', 'chainage of the blocking or hit point, decreasing direction (m)'),
        Column('ground_sight_fwd_m', 'float', 'line of sight on the raw ground profile, increasing chainage (diagnostic, m)'),
        Column('ground_sight_back_m', 'float', 'line of sight on the raw ground profile, decreasing chainage (diagnostic, m)'),
        Column('v85_fwd_kmh', 'float', 'predicted 85th-percentile speed, increasing chainage (FHWA-RD-99-171, km/h)'),
        Column('v85_back_kmh', 'float', 'predicted 85th-percentile speed, decreasing chainage (km/h)'),
        Column('speed_fwd_kmh', 'float', 'speed judged at, increasing chainage (km/h)'),
        Column('speed_back_kmh', 'float', 'speed judged at, decreasing chainage (km/h)'),
        Column('sight_3d_fwd_m', 'float', 'available sight distance along the lane over the DEM in 3D, increasing chainage (m; empty where the ground is not a DEM)'),
        Column('sight_3d_fwd_limit', 'str', 'what limits the 3D sight, increasing chainage: crest, roadside terrain, roadside object, look-ahead or end of road'),
        Column('sight_3d_back_m', 'float', 'available sight distance along the lane over the DEM in 3D, decreasing chainage (m)'),
        Column('sight_3d_back_limit', 'str', 'what limits the 3D sight, decreasing chainage'),
    ),
    "work.curves": (
        Column('road_id', 'str', 'road identifier from the roads file'),
        Column('curve_no', 'int', 'vertical curve number along the road, from its first vertex'),
        Column('kind', 'str', 'crest (grade decreases) or sag (grade increases)'),
        Column('pvc_m', 'float', "chainage of the start of the curve (m from the road's first vertex)"),
        Column('pvi_m', 'float', 'chainage of the point of vertical intersection (m)'),
        Column('pvt_m', 'float', 'chainage of the end of the curve (m)'),
        Column('pvi_elev_m', 'float', 'elevation of the PVI (m)'),
        Column('g1_pct', 'float', 'grade entering the curve, in the direction of increasing chainage (%)'),
        Column('g2_pct', 'float', 'grade leaving the curve (%)'),
        Column('a_pct', 'float', 'algebraic difference of grades A = |g2 - g1| (%)'),
        Column('length_m', 'float', 'horizontal length of the curve L (m)'),
        Column('k', 'float', 'rate of vertical curvature K = L / A (m per %)'),
        Column('fit_rmse_m', 'float', 'root-mean-square misfit of the fitted curve to the ground profile (m)'),
        Column('turn_m', 'float', 'chainage of the high (crest) or low (sag) point where it lies on the curve (m)'),
        Column('turn_elev_m', 'float', 'elevation of the high or low point (m)'),
        Column('confidence', 'str', 'how well the curve fits the ground data alone: high, medium or low (see flags)'),
        Column('flags', 'str', "why the fit's confidence is not high"),
        Column('judged', 'bool', "false where the curve's zone is mostly without usable ground data: no verdict given"),
        Column('a_sd_pct', 'float', 'standard deviation of A (%)'),
        Column('length_sd_m', 'float', 'standard deviation of L, including what the data cannot resolve (m)'),
        Column('corr_al', 'float', 'correlation of the errors of A and L'),
        Column('k_sd', 'float', 'standard deviation of K (m per %)'),
        Column('noise_sd_m', 'float', 'spread of the ground profile about the fitted curve (robust, m)'),
        Column('noise_rho', 'float', 'correlation of that misfit from one station to the next (0-0.95)'),
        Column('significance', 'float', 'A divided by its standard deviation: how clearly the data show the grade change'),
        Column('resolution_m', 'float', 'shortest feature the ground data resolve along the road (m)'),
        Column('ground_spacing_m', 'float', "the ground data's own spacing on the road: DEM cell size or median ground-point spacing (m)"),
        Column('sight_sd_m', 'float', "standard deviation of the sight distance over the curve, from the fit's covariance (m)"),
        Column('sight_formula_m', 'float', 'sight distance from the closed-form AASHTO expression for this A and L (m)'),
        Column('sight_3d_min_m', 'float', 'shortest 3D sight distance over the DEM at the stations on the curve, either direction (m; empty where the ground is not a DEM)'),
    ),
    "work.keypoints": (
        Column('road_id', 'str', 'road identifier from the roads file'),
        Column('chainage_m', 'float', 'distance along the road from its first vertex (m)'),
        Column('direction', 'str', 'direction of travel: increasing or decreasing chainage'),
        Column('sight_m', 'float', 'available sight distance from the key point (m)'),
        Column('limit_kind', 'str', 'what limits the sight distance: line of sight, headlight or look-ahead'),
        Column('curve_no', 'int', 'the vertical curve seen from its PVC or PVT'),
        Column('grade', 'float', 'grade in the direction of travel (fraction)'),
        Column('speed_kmh', 'float', 'speed the road is judged at (km/h)'),
    ),
    "work.hazards": (
        Column('road_id', 'str', 'road identifier from the roads file'),
        Column('curve_no', 'int', 'vertical curve number along the road, from its first vertex'),
        Column('direction', 'str', 'direction of travel: increasing or decreasing chainage'),
        Column('hidden_from_m', 'float', 'start of the road surface hidden beyond the crest at the required SSD (m)'),
        Column('hidden_to_m', 'float', 'end of the hidden road surface (m)'),
        Column('hidden_hazard', 'str', 'what the crest hides from a driver at the required SSD: none, horizontal curve, junction or both'),
        Column('hazard_chainage_m', 'float', 'chainage of the first hidden hazard a driver meets (m)'),
        Column('hazard_detail', 'str', 'the hidden hazards and where they are'),
    ),
    "work.hcurves": (
        Column('road_id', 'str', 'road identifier from the roads file'),
        Column('hcurve_no', 'int', 'horizontal curve number along the road'),
        Column('start_m', 'float', 'chainage where the horizontal curve begins (m)'),
        Column('end_m', 'float', 'chainage where the horizontal curve ends (m)'),
        Column('length_m', 'float', 'length of the horizontal curve (m)'),
        Column('radius_m', 'float', 'radius of the least-squares circle through the curve (m)'),
        Column('deflection_deg', 'float', 'change of heading through the curve (degrees)'),
        Column('direction', 'str', 'direction of the turn, travelling with increasing chainage: left or right'),
        Column('fit_rmse_m', 'float', 'root-mean-square misfit of the fitted curve to the ground profile (m)'),
        Column('speed_kmh', 'float', 'speed the road is judged at (km/h)'),
        Column('r_min_m', 'float', 'minimum radius for the speed: V^2 / (127 (e + f)) (m)'),
        Column('below_min_radius', 'bool', 'true where the radius is below the minimum for the speed'),
        Column('ssd_required_m', 'float', "stopping sight distance required at the road's speed by the criteria set (m)"),
        Column('hso_m', 'float', "lateral clearance from the inside lane's centre needed for the required SSD (m), to verify in the field"),
        Column('hso_valid', 'bool', 'false where the required SSD is longer than the curve (the HSO formula then overstates)'),
        Column('v85_kmh', 'float', 'predicted 85th-percentile car speed on the curve (FHWA-RD-99-171) (km/h)'),
        Column('sight_3d_min_m', 'float', 'shortest 3D sight distance over the DEM at the stations on the curve, either direction (m; empty where the ground is not a DEM)'),
    ),
    "work.clearances": (
        Column('road_id', 'str', 'road identifier from the roads file'),
        Column('direction', 'str', 'direction of travel: increasing or decreasing chainage'),
        Column('from_m', 'float', 'start of the stretch whose 3D sight falls short while its 2D sight does not (m)'),
        Column('to_m', 'float', 'end of that stretch (m)'),
        Column('limit_kind', 'str', 'roadside terrain or roadside object (the surface model)'),
        Column('hcurve_no', 'int', 'the horizontal curve the required sight lines cross most (0 = none)'),
        Column('ssd_required_m', 'float', 'largest required SSD over the stretch (m)'),
        Column('sight_3d_m', 'float', 'shortest 3D sight over the stretch (m)'),
        Column('clear_area_m2', 'float', 'plan area of ground or objects standing above the required sight lines (m²)'),
        Column('object_area_m2', 'float', 'of that area, roadside objects of the surface model (m²)'),
        Column('clear_volume_m3', 'float', 'ground to cut so that the required sight lines clear it (m³)'),
        Column('max_cut_m', 'float', 'deepest cut or clearing needed (m)'),
        Column('clearance_wkt', 'str', 'outline of the area to clear, WKT in the roads CRS'),
        Column('blocking_wkt', 'str', 'the points blocking the first hidden sight line of each station, WKT multipoint in the roads CRS'),
    ),
    "work.notes": (
        Column('road_id', 'str', 'road identifier from the roads file'),
        Column('note', 'str', 'what was found, masked, substituted or dropped'),
        Column('from_m', 'float', 'chainage where the stretch the note is about begins (m)'),
        Column('to_m', 'float', 'chainage where it ends (m)'),
        Column('detail', 'str', 'values found and used, and why'),
    ),
    "work.status": (
        Column('road_id', 'str', 'road identifier from the roads file'),
        Column('status', 'str', 'evaluated, or skipped with a reason'),
        Column('reason', 'str', 'why the road was skipped'),
        Column('ground_spacing_m', 'float', "the ground data's own spacing on the road: DEM cell size or median ground-point spacing (m)"),
        Column('resolution_m', 'float', 'shortest feature the ground data resolve along the road (m)'),
    ),
    "curves": (
        Column('road_id', 'str', 'road identifier from the roads file'),
        Column('curve_no', 'int', 'vertical curve number along the road, from its first vertex'),
        Column('kind', 'str', 'crest (grade decreases) or sag (grade increases)'),
        Column('pvc_m', 'float', "chainage of the start of the curve (m from the road's first vertex)"),
        Column('pvi_m', 'float', 'chainage of the point of vertical intersection (m)'),
        Column('pvt_m', 'float', 'chainage of the end of the curve (m)'),
        Column('pvi_elev_m', 'float', 'elevation of the PVI (m)'),
        Column('g1_pct', 'float', 'grade entering the curve, in the direction of increasing chainage (%)'),
        Column('g2_pct', 'float', 'grade leaving the curve (%)'),
        Column('a_pct', 'float', 'algebraic difference of grades A = |g2 - g1| (%)'),
        Column('length_m', 'float', 'horizontal length of the curve L (m)'),
        Column('k', 'float', 'rate of vertical curvature K = L / A (m per %)'),
        Column('fit_rmse_m', 'float', 'root-mean-square misfit of the fitted curve to the ground profile (m)'),
        Column('sight_available_m', 'float', 'shortest sight distance this curve allows a driver, either direction (m)'),
        Column('ssd_required_m', 'float', "stopping sight distance required at the road's speed by the criteria set (m)"),
        Column('speed_kmh', 'float', 'speed the road is judged at (km/h)'),
        Column('deficient', 'bool', "true only where the verdict is 'deficient'"),
        Column('judged', 'bool', "false where the curve's zone is mostly without usable ground data: no verdict given"),
        Column('supported_speed_kmh', 'float', 'highest speed whose SSD the available sight distance meets (km/h)'),
        Column('k_required', 'float', "K the criteria set tabulates for the road's speed (m per %)"),
        Column('k_below_table', 'bool', 'true where K is below the table value (a short curve may still give enough sight)'),
        Column('sight_increasing_m', 'float', 'shortest sight distance travelling with increasing chainage (m)'),
        Column('sight_decreasing_m', 'float', 'shortest sight distance travelling with decreasing chainage (m)'),
        Column('sight_formula_m', 'float', 'sight distance from the closed-form AASHTO expression for this A and L (m)'),
        Column('sight_limited_by', 'str', "whether this curve limits any driver's sight within the look-ahead"),
        Column('turn_m', 'float', 'chainage of the high (crest) or low (sag) point where it lies on the curve (m)'),
        Column('turn_elev_m', 'float', 'elevation of the high or low point (m)'),
        Column('verdict', 'str', 'deficient, adequate, or undetermined at this data quality (the probability is between the decision thresholds, the grade change is not clear in the data, or the curve lacks ground data)'),
        Column('p_deficient', 'float', 'probability that the sight distance over the curve is below the required SSD, from its standard deviation (0-1)'),
        Column('confidence', 'str', "high: the verdict's probability is beyond the high threshold, the fit clean and the grade change clear; medium: decided but less sure; low: undetermined, or the fit is poor"),
        Column('to_settle', 'str', 'what would settle an undetermined verdict'),
        Column('sight_sd_m', 'float', "standard deviation of the sight distance over the curve, from the fit's covariance (m)"),
        Column('k_sd', 'float', 'standard deviation of K (m per %)'),
        Column('a_sd_pct', 'float', 'standard deviation of A (%)'),
        Column('length_sd_m', 'float', 'standard deviation of L, including what the data cannot resolve (m)'),
        Column('significance', 'float', 'A divided by its standard deviation: how clearly the data show the grade change'),
        Column('noise_sd_m', 'float', 'spread of the ground profile about the fitted curve (robust, m)'),
        Column('noise_rho', 'float', 'correlation of that misfit from one station to the next (0-0.95)'),
        Column('resolution_m', 'float', 'shortest feature the ground data resolve along the road (m)'),
        Column('fit_confidence', 'str', 'how well the curve fits the ground data alone: high, medium or low (see flags)'),
        Column('flags', 'str', "why the fit's confidence is not high"),
        Column('sight_3d_min_m', 'float', 'shortest 3D sight distance over the DEM at the stations on the curve, either direction (m; empty where the ground is not a DEM)'),
    ),
    "deficiencies": (
        Column('rank', 'int', '1 = first to fix'),
        Column('road_id', 'str', 'road identifier from the roads file'),
        Column('curve_no', 'int', 'vertical curve number along the road, from its first vertex'),
        Column('kind', 'str', 'crest (grade decreases) or sag (grade increases); roadside where the ground or objects beside the road limit the 3D sight'),
        Column('direction', 'str', 'direction of travel: increasing or decreasing chainage'),
        Column('from_m', 'float', 'start of the deficient stretch: driver positions lacking SSD (m)'),
        Column('to_m', 'float', 'end of the deficient stretch (m)'),
        Column('speed_kmh', 'float', 'speed the road is judged at (km/h)'),
        Column('supported_speed_kmh', 'float', 'highest speed whose SSD the available sight distance meets (km/h)'),
        Column('ssd_required_m', 'float', "stopping sight distance required at the road's speed by the criteria set (m)"),
        Column('sight_available_m', 'float', 'shortest sight distance this curve allows a driver, either direction (m)'),
        Column('shortfall_m', 'float', 'required SSD minus available sight distance (m)'),
        Column('k', 'float', 'rate of vertical curvature K = L / A (m per %)'),
        Column('k_required', 'float', "K the criteria set tabulates for the road's speed (m per %)"),
        Column('aadt', 'float', 'annual average daily traffic (vehicles/day)'),
        Column('priority_score', 'float', 'higher first (0-100, plus 100 x hazard weight where the crest hides a hazard); formula in the Method sheet'),
        Column('severity', 'str', 'minor / moderate / severe by the speed gap'),
        Column('hidden_hazard', 'str', 'what the crest hides from a driver at the required SSD: none, horizontal curve, junction or both'),
        Column('hazard_chainage_m', 'float', 'chainage of the first hidden hazard a driver meets (m)'),
        Column('hazard_detail', 'str', 'the hidden hazards and where they are'),
        Column('hidden_from_m', 'float', 'start of the road surface hidden beyond the crest at the required SSD (m)'),
        Column('hidden_to_m', 'float', 'end of the hidden road surface (m)'),
        Column('treatment_hint', 'str', 'first thought on treatment (TRB SR 214 3R guidance); for the engineer to decide'),
        Column('speed_gap_kmh', 'float', 'road speed minus supported speed (km/h)'),
        Column('stretch_length_m', 'float', 'length of the deficient stretch (m)'),
        Column('road_name', 'str', 'road name'),
        Column('road_class', 'str', 'road class'),
        Column('speed_basis', 'str', 'where the judged speed comes from'),
        Column('a_pct', 'float', 'algebraic difference of grades A = |g2 - g1| (%)'),
        Column('curve_length_m', 'float', 'length of the curve (m)'),
        Column('pvi_m', 'float', 'chainage of the point of vertical intersection (m)'),
        Column('verdict', 'str', 'deficient, adequate, or undetermined at this data quality (the probability is between the decision thresholds, the grade change is not clear in the data, or the curve lacks ground data)'),
        Column('p_deficient', 'float', 'probability that the sight distance over the curve is below the required SSD, from its standard deviation (0-1)'),
        Column('confidence', 'str', "high: the verdict's probability is beyond the high threshold, the fit clean and the grade change clear; medium: decided but less sure; low: undetermined, or the fit is poor"),
        Column('to_settle', 'str', 'what would settle an undetermined verdict'),
        Column('limit_kind', 'str', 'what limits sight: line of sight (crest), headlight (sag), or for roadside rows roadside terrain or roadside object (3D sight lines)'),
        Column('f_shortfall', 'float', 'priority factor: shortfall / required SSD (0-1)'),
        Column('f_speed', 'float', 'priority factor: speed gap / 50 km/h (0-1)'),
        Column('f_exposure', 'float', 'priority factor: ln(1 + AADT) / ln(1 + reference AADT) (0-1)'),
        Column('hcurve_no', 'int', 'roadside rows: the horizontal curve the required sight lines cross'),
        Column('clear_area_m2', 'float', 'roadside rows: plan area of ground or objects standing above the required sight lines, to clear (m²)'),
        Column('clear_volume_m3', 'float', 'roadside rows: ground to cut so that the required sight lines clear it (m³)'),
    ),
    "roads": (
        Column('road_id', 'str', 'road identifier from the roads file'),
        Column('name', 'str', 'road name from the roads file'),
        Column('road_class', 'str', 'road class'),
        Column('aadt', 'float', 'annual average daily traffic (vehicles/day)'),
        Column('speed_kmh', 'float', 'speed the road is judged at (km/h)'),
        Column('speed_basis', 'str', 'where the judged speed comes from'),
        Column('length_m', 'float', 'road length (m)'),
        Column('status', 'str', 'evaluated, or skipped with a reason'),
        Column('reason', 'float', 'why the road was skipped'),
        Column('ground_spacing_m', 'float', "the ground data's own spacing on the road: DEM cell size or median ground-point spacing (m)"),
        Column('resolution_m', 'float', 'shortest feature the ground data resolve along the road (m)'),
    ),
    "horizontal_curves": (
        Column('road_id', 'str', 'road identifier from the roads file'),
        Column('hcurve_no', 'int', 'horizontal curve number along the road'),
        Column('start_m', 'float', 'chainage where the horizontal curve begins (m)'),
        Column('end_m', 'float', 'chainage where the horizontal curve ends (m)'),
        Column('length_m', 'float', 'length of the horizontal curve (m)'),
        Column('radius_m', 'float', 'radius of the least-squares circle through the curve (m)'),
        Column('deflection_deg', 'float', 'change of heading through the curve (degrees)'),
        Column('direction', 'str', 'direction of the turn, travelling with increasing chainage: left or right'),
        Column('fit_rmse_m', 'float', 'root-mean-square distance of the centreline from the fitted circle (m)'),
        Column('speed_kmh', 'float', 'speed judged on the curve, the higher of both directions (km/h)'),
        Column('r_min_m', 'float', 'minimum radius for the speed: V^2 / (127 (e + f)) (m)'),
        Column('below_min_radius', 'bool', 'true where the radius is below the minimum for the speed'),
        Column('ssd_required_m', 'float', 'stopping sight distance required at that speed (m)'),
        Column('hso_m', 'float', "lateral clearance from the inside lane's centre needed for the required SSD (m), to verify in the field"),
        Column('hso_valid', 'bool', 'false where the required SSD is longer than the curve (the HSO formula then overstates)'),
        Column('v85_kmh', 'float', 'predicted 85th-percentile car speed on the curve (FHWA-RD-99-171) (km/h)'),
        Column('sight_3d_min_m', 'float', 'shortest 3D sight distance over the DEM at the stations on the curve, either direction (m; empty where the ground is not a DEM)'),
    ),
    "data_notes": (
        Column('road_id', 'str', 'road identifier from the roads file'),
        Column('note', 'str', 'what was found, masked, substituted or dropped'),
        Column('from_m', 'float', 'chainage where the stretch the note is about begins (m)'),
        Column('to_m', 'float', 'chainage where it ends (m)'),
        Column('detail', 'str', 'values found and used, and why'),
    ),
    "profiles": (
        Column('road_id', 'str', 'road identifier from the roads file'),
        Column('chainage_m', 'float', 'distance along the road from its first vertex (m)'),
        Column('x', 'float', 'easting of the station in the roads CRS'),
        Column('y', 'float', 'northing of the station in the roads CRS'),
        Column('ground_z_m', 'float', 'ground elevation read at the station (m)'),
        Column('ground_flag', 'str', 'measured, filled (short gap interpolated), masked (artefact) or missing'),
        Column('ground_offset_m', 'float', 'where across the corridor the profile was read: offset from the centreline, + left (m)'),
        Column('filter_m', 'float', 'equivalent length of the cell-crossing filter applied to the profile, 0 where none (m)'),
        Column('fitted_z_m', 'float', 'elevation of the fitted alignment (m)'),
        Column('grade_pct', 'float', 'grade of the fitted alignment, + uphill with increasing chainage (%)'),
        Column('sight_fwd_m', 'float', 'available sight distance travelling with increasing chainage (m)'),
        Column('limit_fwd', 'str', 'what limits the sight distance with increasing chainage: line of sight, headlight or look-ahead'),
        Column('curve_fwd', 'int', 'the vertical curve that limits it with increasing chainage (0 = none)'),
        Column('limit_at_fwd_m', 'float', 'chainage of the blocking or hit point, increasing direction (m)'),
        Column('sight_back_m', 'float', 'available sight distance travelling with decreasing chainage (m)'),
        Column('limit_back', 'str', 'what limits it with decreasing chainage'),
        Column('curve_back', 'int', 'the vertical curve that limits it with decreasing chainage (0 = none)'),
        Column('limit_at_back_m', 'float', 'chainage of the blocking or hit point, decreasing direction (m)'),
        Column('ground_sight_fwd_m', 'float', 'line of sight on the raw ground profile, increasing chainage (diagnostic, m)'),
        Column('ground_sight_back_m', 'float', 'line of sight on the raw ground profile, decreasing chainage (diagnostic, m)'),
        Column('v85_fwd_kmh', 'float', 'predicted 85th-percentile speed, increasing chainage (FHWA-RD-99-171, km/h)'),
        Column('v85_back_kmh', 'float', 'predicted 85th-percentile speed, decreasing chainage (km/h)'),
        Column('speed_fwd_kmh', 'float', 'speed judged at, increasing chainage (km/h)'),
        Column('speed_back_kmh', 'float', 'speed judged at, decreasing chainage (km/h)'),
        Column('sight_3d_fwd_m', 'float', 'available sight distance along the lane over the DEM in 3D, increasing chainage (m; empty where the ground is not a DEM)'),
        Column('sight_3d_fwd_limit', 'str', 'what limits the 3D sight, increasing chainage: crest, roadside terrain, roadside object, look-ahead or end of road'),
        Column('sight_3d_back_m', 'float', 'available sight distance along the lane over the DEM in 3D, decreasing chainage (m)'),
        Column('sight_3d_back_limit', 'str', 'what limits the 3D sight, decreasing chainage'),
    ),
}


def table(name: str) -> tuple[Column, ...]:
    """The columns of a table, in order.

    Parameters
    ----------
    name : str
        A key of :data:`TABLES`.

    Returns
    -------
    tuple of Column
    """
    return TABLES[name]


def column_names(name: str) -> list[str]:
    """The column names of a table, in order.

    Parameters
    ----------
    name : str
        A key of :data:`TABLES`.

    Returns
    -------
    list of str
    """
    return [c.name for c in TABLES[name]]


def meaning(name: str, column: str) -> str | None:
    """What a column of a table holds.

    Parameters
    ----------
    name : str
        A key of :data:`TABLES`.
    column : str
        The column's name.

    Returns
    -------
    str or None
        Its meaning; None where the table has no such column.
    """
    for c in TABLES.get(name, ()):
        if c.name == column:
            return c.meaning
    return None


def empty_frame(name: str) -> pd.DataFrame:
    """An empty table with the columns and types of a registered table.

    Parameters
    ----------
    name : str
        A key of :data:`TABLES`.

    Returns
    -------
    pandas.DataFrame
        No rows; one column per registered column, of its type.
    """
    return pd.DataFrame({c.name: pd.Series(dtype=_DTYPES[c.dtype]) for c in TABLES[name]})


def markdown(name: str) -> str:
    """The columns of a table as Markdown.

    Parameters
    ----------
    name : str
        A key of :data:`TABLES`.

    Returns
    -------
    str
        A Markdown table: column, unit, meaning.
    """
    rows = ["| column | unit | meaning |", "|---|---|---|"]
    rows += [f"| `{c.name}` | {c.unit} | {c.meaning} |" for c in TABLES[name]]
    return "\n".join(rows)


OUTPUT_FILES = {"curves": "curves.csv", "deficiencies": "deficiencies.csv", "roads": "roads.csv",
                "horizontal_curves": "horizontal_curves.csv", "data_notes": "data_notes.csv",
                "profiles": "profiles.parquet"}


def readme_columns() -> str:
    """The README's section listing the columns of every output file."""
    parts = []
    for name, file in OUTPUT_FILES.items():
        parts.append(f"#### `{file}`\n\n{markdown(name)}\n")
    return "\n".join(parts)


if __name__ == "__main__":
    sys.stdout.write(readme_columns())
