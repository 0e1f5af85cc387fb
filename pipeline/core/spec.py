"""The table of every setting: its section, key, default and one-line description.

:data:`SPEC` is the one place defaults live; :mod:`pipeline.core.config` reads and checks
settings against it, and the stage modules take their defaults from it through
:func:`section_defaults`. Lengths are metres, speeds km/h, grades percent, unless the key's
name says otherwise.
"""

from __future__ import annotations

import copy
from typing import Any

# checks on the inputs that checks.override may name (see pipeline.runner.evidence)
CHECKS = ("speed_unit", "elevation_unit", "coverage", "grades")

# section -> key -> (default, description). The description is what
# ``sightaudit init`` writes above the key in the example config.
SPEC: dict[str, dict[str, tuple[Any, str]]] = {
    "roads": {
        "id_column": ("road_id", "column holding each road's identifier (kept as text)"),
        "speed_column": ("speed_kmh", "column holding the speed each road is judged at"),
        "aadt_column": ("aadt", "column holding annual average daily traffic (vehicles/day)"),
        "class_column": ("road_class", "column holding the road class (for summaries and default speeds)"),
        "name_column": ("name", "column holding the road's name (optional)"),
        "layer": ("", "GeoPackage layer with the centrelines; empty = the only layer, or 'roads'"),
        "wkt_column": ("wkt", "CSV only: column with the centreline as WKT"),
        "crs": ("", "CRS of the roads file when it has none (CSV), e.g. 'EPSG:32633'"),
        "speed_unit": ("", "unit of the speed column: 'kmh' or 'mph'; empty = that of output.units (a column "
                           "name ending in the other unit then stops the run)"),
        "join_tolerance_m": (0.5, "largest gap between parts of a multi-part road that is still joined (m)"),
    },
    "ground": {
        "layer": ("", "GeoPackage layer with ground points; empty = the only layer"),
        "crs": ("", "CRS of ground points or DEM when the file has none; empty = same as roads"),
        "elevation_unit": ("m", "unit of ground elevations: 'm', 'ft' (international foot) or 'us_ft' (US survey foot)"),
        "z_column": ("z", "column holding ground elevation in a points file"),
        "max_offset_m": (15.0, "ground points farther than this from their road's centreline are dropped (m)"),
        "band": (1, "DEM band to read"),
        "vertical_error_m": (0.0, "vertical error of the ground data (m, one standard deviation); 0 = for a DEM, assumed from the cell "
                                  "size (0.10 m up to 3 m cells, 0.5 m up to 15 m, 1.5 m beyond) and reported"),
    },
    "profile": {
        "step_m": (5.0, "distance between profile stations along the road (m)"),
        "max_gap_m": (20.0, "ground gaps longer than this are left missing, shorter ones are interpolated and marked (m)"),
        "corridor_half_width_m": (12.0, "on a fine DEM the carriageway is searched for this far either side of the "
                                        "given centreline, and the profile read on it; 0 = read the centreline as given (m)"),
        "corridor_max_cell_m": (3.0, "DEMs with cells up to this show the road prism and are searched for the "
                                     "carriageway; coarser ones are filtered against the cell-crossing ripple (m)"),
        "carriageway_width_m": (7.0, "width of the carriageway with its shoulders, for the carriageway search (m)"),
    },
    "alignment": {
        "min_tangent_m": (20.0, "shortest straight piece the segmentation may create; a PVI needs this much data each side (m)"),
        "min_grade_change_pct": (0.5, "a PVI with a smaller change of grade is not kept as a vertical curve (%)"),
        "split_gap_m": (150.0, "the profile is fitted in separate stretches across data gaps longer than this (m)"),
        "short_tangent_m": (60.0, "two crests (or two sags) closer than this are flagged as broken-back (m)"),
        "bin_m": (10.0, "the number and rough place of PVIs are found on means over bins this long (m)"),
        "noise_floor_m": (0.002, "ground noise is taken as at least this when estimating it from the data (m)"),
    },
    "artefacts": {
        "spike_m": (0.5, "a sample this far from what its neighbours imply is a spike or pit, masked (m)"),
        "max_grade_pct": (20.0, "grades steeper than this between stations mark a bridge dip or hump (%)"),
        "min_k": (1.0, "curvature sharper than a vertical curve of this K marks a dip or hump (m per %)"),
        "max_width_m": (150.0, "dips and humps wider than this are not masked (m)"),
        "max_road_grade_pct": (25.0, "a road with more than 5 % of its length steeper than this is skipped (%)"),
    },
    "structures": {
        "file": ("", "known bridges and culverts (points or lines, CSV or GPKG) whose span is masked"),
        "layer": ("", "GeoPackage layer of the structures; empty = the only layer"),
        "buffer_m": (10.0, "masked beyond each end of a known structure (m)"),
        "default_length_m": (30.0, "length masked around a structure given as a point (m)"),
        "max_offset_m": (25.0, "a structure further than this from a road's centreline is not on that road (m)"),
    },
    "run": {
        "workers": (0, "processes for the per-road stages; 0 = every core, 1 = none (all in this process)"),
        "chunk_km": (200.0, "most road length handed to a worker at a time (chunks are balanced by cost, at least "
                            "two per worker); memory grows with it, not the network (km)"),
        "engine": ("local", "'local' (this machine) or 'dask' (a Dask cluster, see run.scheduler)"),
        "scheduler": ("", "address of the Dask scheduler for the dask engine, e.g. 'tcp://10.0.0.5:8786'"),
    },
    "output": {
        "units": ("metric", "'metric' (m, km/h) or 'us' (ft, mph): speeds are read and every result written in these "
                            "units; 'us' also judges with aashto-2018-us unless criteria.set says otherwise"),
        "us_foot": ("ft", "foot of US customary output: 'ft' (international) or 'us_ft' (US survey)"),
        "report_curves": (50, "deficient curves given a page of their own in report.html (in rank order)"),
        "report_road_profiles": (100, "roads given a long profile in report.html's road-by-road index (roads with "
                                      "deficient stretches first; profiles.pdf has every road)"),
        "profiles_pdf": (False, "also write profiles.pdf, one long profile per road for the field team"),
        "sheet_paper": ("auto", "paper of profiles.pdf, landscape: 'A3', 'A4', 'tabloid', 'letter', or 'auto' "
                                "(A3 for metric runs, tabloid for US runs)"),
    },
    "criteria": {
        "set": ("aashto-2018-metric", "criteria set to judge against (sightaudit criteria lists them)"),
        "grade_adjusted": (False, "required SSD on the grade of each station rather than level (as the K tables assume)"),
        "files": ([], "CSV files adding criteria sets of your own (sightaudit criteria --template)"),
    },
    "speed": {
        "source": ("attribute", "'attribute': judge at the roads' speed column; 'predicted': at the 85th-percentile "
                                "speed predicted by FHWA-RD-99-171"),
        "margin_kmh": (0.0, "added to every road's attribute speed before judging (e.g. 10 for posted + 10 km/h)"),
        "default_by_class": ({}, "speed (km/h) for roads of a class with no speed, e.g. { local = 60 }"),
        "predict_missing": (True, "roads with no usable speed (and no class default) are judged at predicted speeds"),
        "desired_kmh": (98.0, "drivers' desired speed on long tangents, the ceiling of predicted speeds (km/h)"),
    },
    "plan": {
        "smooth_m": (50.0, "length over which the centreline's heading is smoothed against digitising noise (m)"),
        "max_radius_m": (3000.0, "bends flatter than this radius are treated as tangent (m)"),
        "min_length_m": (20.0, "shortest horizontal curve kept (m)"),
        "min_deflection_deg": (3.0, "smallest turn kept as a horizontal curve (degrees)"),
        "e_max_pct": (8.0, "maximum superelevation for the minimum-radius check (4, 6 or 8 %)"),
        "lane_width_m": (3.6, "lane width: the sight line offset is measured from the inside lane's centre (m)"),
    },
    "junctions": {
        "file": ("", "junctions and accesses (points, CSV or GPKG) checked for in the zones hidden by crests"),
        "layer": ("", "GeoPackage layer of the junctions; empty = the only layer"),
        "max_offset_m": (30.0, "a junction further than this from a road's centreline is not on that road (m)"),
        "from_network": (True, "also take a junction wherever one road's end lies on another road"),
        "snap_m": (5.0, "how close a road's end must come to another road to make a junction (m)"),
    },
    "sight": {
        "fine_step_m": (2.0, "spacing of the road samples a sight line is checked against (m)"),
        "ground_diagnostic": (True, "also measure the line of sight on the raw ground profile, at the station "
                                    "step (diagnostic columns)"),
        "three_d": (True, "on a DEM, also measure sight lines in 3D over the ground beside the road (cuts, banks, "
                          "and trees where a surface model is given)"),
        "lane_width_m": (0.0, "lane width for the 3D sight lines: the driver's eye and the object are half of it "
                              "from the centreline; 0 = plan.lane_width_m (m)"),
        "traffic_side": ("right", "which side of the road traffic keeps to: 'right' or 'left' (the lane the 3D "
                                  "sight lines start and end in)"),
        "surface": ("", "a surface model (raster with trees and buildings, same heights as the DEM) whose "
                        "objects block the 3D sight lines; empty = bare ground only"),
        "object_min_height_m": (0.5, "the surface model counts as a roadside object where it stands this much above "
                                     "the DEM (m)"),
    },
    "confidence": {
        "p_verdict": (0.9, "a curve is judged deficient only where the probability that its sight distance is "
                           "short of the requirement is at least this"),
        "p_adequate": (0.05, "a curve is judged adequate only where that probability is at most this (smaller than "
                             "1 - p_verdict: a wrong 'adequate' is the costlier error); between the two, undetermined"),
        "p_high": (0.99, "a verdict is of high confidence only where that probability is at least this "
                         "(or at most 1 minus it), the fit is clean and the grade change clear"),
        "min_significance": (3.0, "a grade change smaller than this many standard deviations is never judged deficient"),
        "high_significance": (5.0, "a grade change must be this many standard deviations for high confidence"),
        "max_cell_for_verdict_m": (20.0, "on a DEM with cells coarser than this no curve is judged: every verdict "
                                         "is undetermined and the report says why (m)"),
        "fine_resolution_m": (4.0, "ground data resolving features this short (m) count as survey-grade in the "
                                   "advice given with undetermined verdicts"),
    },
    "checks": {
        "override": ([], "checks on the inputs to override, each reported in run.json and the report: "
                         "'speed_unit', 'elevation_unit', 'coverage', 'grades'"),
        "min_coverage_pct": (50.0, "a run stops when the ground data cover less of the road length than this (%)"),
        "max_steep_pct": (25.0, "a run stops when more of the road length than this is steeper than "
                                "artefacts.max_road_grade_pct: usually a wrong elevation unit (%)"),
    },
    "inventory": {
        "severity_bands_kmh": ([10.0, 20.0], "speed gaps (km/h) separating minor, moderate and severe deficiencies"),
        "priority_weights": ({"shortfall": 1.0, "speed": 1.0, "exposure": 1.0},
                             "weights of shortfall, speed gap and traffic exposure in the priority score"),
        "aadt_ref": (20000.0, "AADT at which the exposure factor of the priority score reaches its maximum"),
        "hazard_weight": (1.0, "points (x 100) added to the score of a stretch whose crest hides a hazard"),
        "reconstruction_gap_kmh": (32.0, "speed gap above which reconstruction is hinted (TRB SR 214: 20 mph; from memory)"),
        "reconstruction_aadt": (1500.0, "AADT above which reconstruction is hinted (TRB SR 214; from memory)"),
    },
}


def section_defaults(section: str) -> dict[str, Any]:
    """The default of every key of one section of :data:`SPEC`.

    Parameters
    ----------
    section : str
        Section name, e.g. ``"artefacts"`` or ``"plan"``.

    Returns
    -------
    dict
        Key -> default value (a deep copy, so lists and tables may be changed freely).
    """
    return {k: copy.deepcopy(v[0]) for k, v in SPEC[section].items()}
