"""The alignment stage for one road: tangents and vertical curves fitted to the ground
profile (:mod:`pipeline.alignment.fit`), each curve with its uncertainty
(:mod:`pipeline.alignment.uncertainty`), and curves too short to tell from an angle point
flagged."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from ..alignment.fit import fit_profile
from ..alignment.uncertainty import curve_parameter_covariance, k_sd
from ..core.config import Config

UNCERTAINTY_COLUMNS = ["a_sd_pct", "length_sd_m", "corr_al", "k_sd", "noise_sd_m", "noise_rho", "significance",
                       "resolution_m", "ground_spacing_m"]


@dataclass
class AlignmentStage:
    """What the alignment stage gives for one road: the fitted stretches
    (:class:`pipeline.alignment.fit.Alignment`), the profile with ``fitted_z_m`` (m) and
    ``grade_pct`` (%) added, and the curve table (one row per vertical curve, with its
    uncertainty and ``road_id`` first)."""

    stretches: list
    profile: pd.DataFrame
    curves: pd.DataFrame


def alignment_options(cfg: Config) -> dict:
    """The alignment fit's options from the settings.

    Parameters
    ----------
    cfg : Config
        The run's settings (``alignment.*``: lengths in m, ``min_grade_change_pct`` in %).

    Returns
    -------
    dict
        ``min_tangent_m, min_grade_change_pct, split_gap_m, short_tangent_m, bin_m, noise_floor_m``.
    """
    return {k: cfg[f"alignment.{k}"] for k in ("min_tangent_m", "min_grade_change_pct", "split_gap_m",
                                                "short_tangent_m", "bin_m", "noise_floor_m")}


def road_alignment(road_id: str, profile: pd.DataFrame, data: dict, cfg: Config) -> AlignmentStage:
    """Fit the vertical alignment to a road's profile (the alignment stage).

    The ground data's own error and resolution bound what the fit may resolve: the noise is
    at least the data's stated or assumed vertical error, and structure is sought on bins of
    half the resolution length.

    Parameters
    ----------
    road_id : str
        The road.
    profile : pandas.DataFrame
        The profile stage's table (``chainage_m``, ``ground_z_m`` (m), ``ground_flag``,
        ``filter_m`` (m)); not changed.
    data : dict
        What the ground data resolve (``resolution_m``, ``vertical_error_m``, ``cell_m``; m).
    cfg : Config
        The run's settings (``profile.step_m`` in m, ``alignment.*``).

    Returns
    -------
    AlignmentStage
        The fitted stretches, a new profile with ``fitted_z_m`` and ``grade_pct`` added, and
        the curve table.
    """
    ch = profile["chainage_m"].to_numpy()
    usable = np.where(profile["ground_flag"].to_numpy() == "masked", np.nan, profile["ground_z_m"].to_numpy())
    res_m = float(data.get("resolution_m", cfg["profile.step_m"]))
    filt = profile["filter_m"].to_numpy() if "filter_m" in profile else None
    opts = alignment_options(cfg)
    err = float(data.get("vertical_error_m", 0.0))
    coarse = min(res_m / 2, float(ch[-1] - ch[0]) / 10)  # a short road still gets ten bins
    opts |= {"resolution_m": res_m, "noise_floor_m": max(opts["noise_floor_m"], err),
             "bin_m": max(opts["bin_m"], coarse), "min_tangent_m": max(opts["min_tangent_m"], coarse)}
    stretches, curves, fitted, grade = fit_profile(ch, usable, cfg["profile.step_m"], opts,
                                                   filter_m=filt if filt is not None and filt.any() else None)
    curves = curves.join(curve_uncertainties(stretches, ch, usable, res_m, opts["noise_floor_m"],
                                             data.get("cell_m")))
    curves = _flag_angle_points(curves)
    curves.insert(0, "road_id", road_id)
    return AlignmentStage(stretches=stretches, profile=profile.assign(fitted_z_m=fitted, grade_pct=grade * 100.0),
                          curves=curves)


def _flag_angle_points(curves: pd.DataFrame) -> pd.DataFrame:
    """A copy of the curve table with the curves whose length is within two standard
    deviations of zero flagged (and high confidence lowered to medium): the data show a
    grade change but cannot tell a short curve from an angle point."""
    if not len(curves):
        return curves
    curves = curves.copy()
    short = (curves["length_m"] < 2 * curves["length_sd_m"]) & ~curves["flags"].str.contains("angle point")
    for i in curves.index[short]:
        flag = (f"angle point or very short curve: L = {curves.at[i, 'length_m']:.0f} m is within two standard "
                f"deviations ({2 * curves.at[i, 'length_sd_m']:.0f} m) of zero, so the data cannot tell it from a "
                f"sharp change of grade")
        curves.at[i, "flags"] = "; ".join(f for f in (curves.at[i, "flags"], flag) if f)
        if curves.at[i, "confidence"] == "high":
            curves.at[i, "confidence"] = "medium"
    return curves


def curve_uncertainties(stretches: list, ch: np.ndarray, z: np.ndarray, res_m: float,
                        sigma_floor_m: float, cell_m: float | None = None) -> pd.DataFrame:
    """Each curve's uncertainty, one row per curve in the curve table's order.

    Parameters
    ----------
    stretches : list of Alignment
        The fitted stretches.
    ch, z : numpy.ndarray
        Station chainages and the ground elevations fitted (m; NaN where masked or missing).
    res_m : float
        The ground data's resolution length (m).
    sigma_floor_m : float
        The least noise standard deviation assumed (m).
    cell_m : float, optional
        The DEM cell or ground-point spacing (m).

    Returns
    -------
    pandas.DataFrame
        :data:`UNCERTAINTY_COLUMNS`: the standard deviations of A (%), L (m) and K (m/%),
        the correlation of A and L, the residual noise (m) and its correlation, the
        significance of the grade change (A / sd_A), the resolution length and the ground
        spacing (m).
    """
    rows = []
    for al in stretches:
        for i in range(1, len(al.x) - 1):
            u = curve_parameter_covariance(al, i, ch, z, sigma_floor_m, res_m, cell_m)
            rows.append(u)
    frame = pd.DataFrame(rows, columns=["a_sd_pct", "length_sd_m", "corr_al", "noise_sd_m", "noise_rho"])
    if not len(frame):
        return pd.DataFrame({c: pd.Series(dtype=float) for c in UNCERTAINTY_COLUMNS})
    a = np.concatenate([np.abs(np.diff(al.grades)) * 100 for al in stretches if len(al.x) > 2])
    L = np.concatenate([al.L[1:-1] for al in stretches if len(al.x) > 2])
    frame["k_sd"] = k_sd(a, L, frame["a_sd_pct"], frame["length_sd_m"], frame["corr_al"])
    with np.errstate(divide="ignore"):
        frame["significance"] = a / frame["a_sd_pct"].to_numpy()
    frame["resolution_m"] = res_m
    frame["ground_spacing_m"] = np.nan if cell_m is None else cell_m
    return frame[UNCERTAINTY_COLUMNS]
