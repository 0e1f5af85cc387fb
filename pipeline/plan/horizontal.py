"""Horizontal alignment from the centreline: heading, curvature, tangents and circular curves.

Method (the heading-direction approach, e.g. Camacho-Torregrosa et al. 2015,
*Computer-Aided Civil and Infrastructure Engineering* 30(4) 282-299 -- cited from
memory):

1. The centreline (working CRS, metres) is resampled every ``step_m`` and its
   heading taken between neighbouring points (unwrapped).
2. The heading is smoothed against digitising noise with a Savitzky-Golay filter
   (Savitzky & Golay 1964, *Analytical Chemistry* 36(8) 1627-1639) over
   ``smooth_m``; curvature is its derivative.
3. Curves are the runs where curvature keeps one sign and exceeds both
   ``1 / max_radius_m`` and four times the curvature's noise (estimated from the
   heading's own scatter), at least ``min_length_m`` long and turning at least
   ``min_deflection_deg``; the rest is tangent.
4. Each curve's radius is a least-squares circle fitted to its points: the
   algebraic fit of Kasa (1976, *IEEE Trans. Instrumentation and Measurement*
   IM-25(1) 8-14) refined by geometric (orthogonal distance) least squares
   (see N. Chernov, *Circular and Linear Regression*, CRC Press 2010). The arc
   is centred where the bend's curvature is centred and is R times the
   deflection long; the circle is fitted first to the run's core, then again to
   that arc.

Per curve: start and end chainage, length, radius, deflection angle (heading
change between the tangents either side, degrees) and direction (left or right in the direction of increasing
chainage), and the circle fit's RMSE.

Checks (AASHTO Green Book ch. 3):

- minimum radius R_min = V^2 / (127 (e + f)) (m, km/h; V^2 / (15 (e + f)) in ft and
  mph), with e the maximum superelevation (setting) and f the side friction
  factor tabulated by speed (``sql/criteria/side_friction.csv``);
- horizontal sight line offset HSO = R (1 - cos(28.65 S / R)) (degrees), the lateral
  clearance from the centre of the inside lane needed for sight distance S, valid
  while S is shorter than the curve.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from ..core.spec import section_defaults
from ..core.estimators import mad_sigma
from ..profile.stations import Polyline, run_lengths

# the [plan] settings' defaults, and the station step of the heading analysis
DEFAULTS = {k: v for k, v in section_defaults("plan").items() if k in ("smooth_m", "max_radius_m", "min_length_m",
                                                                      "min_deflection_deg")} | {"step_m": 5.0}

HCURVE_COLUMNS = ["hcurve_no", "start_m", "end_m", "length_m", "radius_m", "deflection_deg", "direction",
                  "fit_rmse_m"]


def heading_curvature(line, step_m: float, smooth_m: float, poly=None
                      ) -> tuple[np.ndarray, np.ndarray, np.ndarray, float]:
    """Smoothed heading and curvature every ``step_m`` along a centreline, with the curvature's noise.

    Parameters
    ----------
    line : shapely LineString
        The centreline in a metric working CRS (m).
    step_m : float
        Spacing of the analysis points (m).
    smooth_m : float
        Length of the Savitzky-Golay window (m); below five points no smoothing is done.
    poly : Polyline, optional
        ``line`` as a :class:`~pipeline.profile.stations.Polyline`, if already built.

    Returns
    -------
    chainage : ndarray
        Chainage of the points (m).
    heading : ndarray
        Smoothed heading (radians, anticlockwise from east, unwrapped).
    curvature : ndarray
        Its derivative (1/m, positive turning left).
    noise : float
        Standard deviation of the curvature's noise (1/m): the heading's own high-frequency
        scatter (:func:`~pipeline.core.estimators.mad_sigma` of raw minus smoothed) times
        :func:`derivative_noise_gain`.

    References
    ----------
    Savitzky & Golay (1964), *Analytical Chemistry* 36(8) 1627-1639 (quadratic filter);
    Hampel (1974) for the MAD.
    """
    poly = poly or Polyline(line)
    length = poly.length
    n = max(int(np.floor(length / step_m)) + 1, 2)
    ch = np.linspace(0.0, length, n)
    xy = np.column_stack(poly.at(ch))
    d = np.diff(xy, axis=0)
    seg = np.unwrap(np.arctan2(d[:, 1], d[:, 0]))
    # heading at the points: mean of the segments either side
    head = np.concatenate([[seg[0]], 0.5 * (seg[:-1] + seg[1:]), [seg[-1]]])
    h = ch[1] - ch[0] if n > 1 else step_m
    win = int(round(smooth_m / h)) | 1
    if win >= 5 and n > win:
        smooth = savgol_quadratic(head, win)
        curv = savgol_quadratic(head, win, deriv=1, delta=h)
        noise = mad_sigma(head - smooth)
        gain = derivative_noise_gain(win, h)
        return ch, smooth, curv, noise * gain
    curv = np.gradient(head, h) if n > 2 else np.zeros(n)
    return ch, head, curv, 0.0



def derivative_noise_gain(window: int, step_m: float) -> float:
    """Standard deviation of a Savitzky-Golay derivative of white noise of unit sd.

    Parameters
    ----------
    window : int
        Filter window (samples, odd).
    step_m : float
        Sample spacing (m).

    Returns
    -------
    float
        ``sqrt(sum c_k^2)`` (1/m) over the coefficients c_k of the quadratic first-derivative
        filter: a linear filter's output variance is the input variance times the sum of its
        squared weights.

    References
    ----------
    Savitzky, A. and Golay, M. J. E. (1964). *Analytical Chemistry* 36(8), 1627-1639.
    """
    return float(np.sqrt(np.sum(savgol_quadratic_coeffs(window, deriv=1, delta=step_m) ** 2)))


def savgol_quadratic_coeffs(window: int, deriv: int = 0, delta: float = 1.0) -> np.ndarray:
    """Convolution weights of the quadratic Savitzky-Golay filter (or its first derivative).

    Parameters
    ----------
    window : int
        Window length (samples, odd, at least 3).
    deriv : {0, 1}
        0 for the smoothed value, 1 for its first derivative.
    delta : float
        Sample spacing (m); the derivative is per ``delta``.

    Returns
    -------
    ndarray
        ``window`` weights, in convolution order: the least-squares solution of
        ``A c = e_deriv * deriv! / delta^deriv`` with ``A[k, i] = x_i^k``, ``x`` the offsets
        from the window's centre (reversed), as :func:`scipy.signal.savgol_coeffs` computes
        them (the same operations, so the same numbers; scipy.signal is not imported because
        it takes about a second to import).

    References
    ----------
    Savitzky, A. and Golay, M. J. E. (1964). *Analytical Chemistry* 36(8), 1627-1639.
    """
    from scipy.linalg import lstsq

    half = window // 2
    x = np.arange(-half, window - half, dtype=np.float64)[::-1]
    A = x ** np.arange(3, dtype=np.float64).reshape(-1, 1)
    y = np.zeros(3)
    y[deriv] = 1.0 / (delta ** deriv)
    return lstsq(A, y, cond=np.finfo(np.float64).eps * max(A.shape))[0]


def savgol_quadratic(values: np.ndarray, window: int, deriv: int = 0, delta: float = 1.0) -> np.ndarray:
    """Quadratic Savitzky-Golay smoothing (or first derivative) of evenly spaced values.

    Inside, the convolution with :func:`savgol_quadratic_coeffs`; within half a window of
    either end, a quadratic fitted by least squares to the first (last) ``window`` values and
    evaluated there (the ``mode="interp"`` edges of :func:`scipy.signal.savgol_filter`, whose
    operations this repeats so that the numbers are the same).

    Parameters
    ----------
    values : ndarray
        Evenly spaced values (at least ``window`` of them).
    window : int
        Window length (samples, odd, at least 3).
    deriv : {0, 1}
        0 for the smoothed values, 1 for their first derivative.
    delta : float
        Sample spacing; the derivative is per ``delta``.

    Returns
    -------
    ndarray
        The filtered values, as many as ``values``.

    References
    ----------
    Savitzky, A. and Golay, M. J. E. (1964). *Analytical Chemistry* 36(8), 1627-1639.
    """
    from scipy.linalg import lstsq
    from scipy.ndimage import convolve1d

    x = np.asarray(values, dtype=np.float64)
    out = convolve1d(x, savgol_quadratic_coeffs(window, deriv, delta), mode="constant")
    half, n = window // 2, len(x)
    t = np.arange(0, window, dtype=np.float64)
    lhs = t[:, None] ** np.array([2.0, 1.0, 0.0])[None, :]
    scale = np.sqrt(np.sum(lhs * lhs, axis=0))
    lhs /= scale
    for w0, i0, i1 in ((0, 0, half), (n - window, n - half, n)):
        c = lstsq(lhs, x[w0:w0 + window].reshape(-1, 1), cond=window * np.finfo(np.float64).eps)[0]
        c = (c.T / scale).T
        if deriv:
            c = c[:-1].copy() * np.array([2.0, 1.0]).reshape(2, 1)
        at = np.arange(i0 - w0, i1 - w0, dtype=np.float64).reshape(-1, 1)
        poly = np.zeros_like(at)
        for j in range(c.shape[0]):
            poly = poly * at + c[j, ...]
        out[i0:i1] = (poly / (delta ** deriv)).reshape(-1)
    return out


def fit_circle(x: np.ndarray, y: np.ndarray) -> tuple[float, float, float, float]:
    """Least-squares circle through points.

    Parameters
    ----------
    x, y : array_like
        Point coordinates (m).

    Returns
    -------
    (float, float, float, float)
        Centre x, centre y, radius and RMS orthogonal distance of the points (m).

    Notes
    -----
    Kasa's algebraic fit (linear least squares of ``u^2 + v^2 = p u + q v + c`` on centred
    coordinates), then geometric (orthogonal distance) refinement by Gauss-Newton on centre and
    radius, minimising ``sum (|x_i - c| - r)^2``.

    References
    ----------
    Kasa (1976), *IEEE Trans. Instrumentation and Measurement* IM-25(1) 8-14; N. Chernov,
    *Circular and Linear Regression*, CRC Press 2010.
    """
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    mx, my = x.mean(), y.mean()
    u, v = x - mx, y - my
    A = np.column_stack([u, v, np.ones_like(u)])
    (p, q, c), *_ = np.linalg.lstsq(A, u * u + v * v, rcond=None)
    cx, cy = p / 2, q / 2
    r = np.sqrt(max(c + cx * cx + cy * cy, 1e-12))
    for _ in range(20):
        du, dv = u - cx, v - cy
        rho = np.maximum(np.hypot(du, dv), 1e-12)
        res = rho - r
        J = np.column_stack([-du / rho, -dv / rho, -np.ones_like(rho)])
        step, *_ = np.linalg.lstsq(J, -res, rcond=None)
        cx, cy, r = cx + step[0], cy + step[1], r + step[2]
        if np.max(np.abs(step)) < 1e-9 * max(abs(r), 1.0):
            break
    rms = float(np.sqrt(np.mean((np.hypot(u - cx, v - cy) - r) ** 2)))
    return float(cx + mx), float(cy + my), float(abs(r)), rms


def _detect(line, opts: dict, smooth_m: float, poly) -> list[dict]:
    """Curves found with heading smoothed over ``smooth_m``."""
    opts = opts | {"smooth_m": smooth_m}
    ch, head, curv, k_noise = heading_curvature(line, opts["step_m"], smooth_m, poly)
    k_min = max(1.0 / opts["max_radius_m"], 4.0 * k_noise)
    sign = (np.sign(curv) * (np.abs(curv) > k_min)).astype(int)
    # a bend briefly dipping under the threshold (noise) is still one bend
    gap = int(round(opts["smooth_m"] / (ch[1] - ch[0])))
    for a, b in run_lengths(sign == 0):
        if 0 < a and b < len(sign) and b - a <= gap and sign[a - 1] == sign[b]:
            sign[a:b] = sign[a - 1]
    rows = []
    i = 0
    n = len(ch)
    while i < n:
        if sign[i] == 0:
            i += 1
            continue
        j = i
        while j + 1 < n and sign[j + 1] == sign[i]:
            j += 1
        # deflection: heading change between the tangents either side (beyond the smoothing)
        w = int(round(opts["smooth_m"] / (ch[1] - ch[0]) / 2)) + 1
        lo, hi = max(i - w, 0), min(j + w, n - 1)
        defl = np.degrees(head[hi] - head[lo])
        # the arc: centred where the bend's curvature is centred, as long as R x deflection,
        # with R from a circle fitted to it (once from the core of the run, then refined)
        kk = np.abs(curv[lo:hi + 1])
        centre = float(np.sum(kk * ch[lo:hi + 1]) / np.sum(kk))
        run = np.abs(curv[i:j + 1])
        core = np.flatnonzero(run >= 0.5 * np.median(run))
        start, end = ch[i + core[0]], ch[i + core[-1]]
        radius, rms = np.nan, np.nan
        for _ in range(2):
            if end - start < opts["min_length_m"]:
                break
            pts = np.column_stack(poly.at(np.linspace(start, end, max(int((end - start) / 2.0), 8))))
            _, _, radius, rms = fit_circle(pts[:, 0], pts[:, 1])
            arc = min(radius * np.radians(abs(defl)), ch[-1])
            start, end = max(centre - arc / 2, 0.0), min(centre + arc / 2, ch[-1])
        if end - start >= opts["min_length_m"] and abs(defl) >= opts["min_deflection_deg"] and np.isfinite(radius):
            rows.append({"start_m": start, "end_m": end, "length_m": end - start, "radius_m": radius,
                         "deflection_deg": abs(defl), "direction": "left" if defl > 0 else "right",
                         "fit_rmse_m": rms})
        i = j + 1
    return rows


def horizontal_curves(line, opts: dict | None = None, poly=None) -> pd.DataFrame:
    """Circular curves of a centreline (see the module notes).

    Parameters
    ----------
    line : shapely LineString
        The centreline in a metric working CRS (m).
    opts : dict, optional
        ``smooth_m``, ``max_radius_m``, ``min_length_m`` (m), ``min_deflection_deg``
        (degrees) and ``step_m`` (m), over :data:`DEFAULTS`.
    poly : Polyline, optional
        ``line`` as a Polyline, if already built.

    Returns
    -------
    DataFrame
        One row per curve, columns :data:`HCURVE_COLUMNS` (chainages, length, radius and RMSE
        in m; deflection in degrees; direction 'left' or 'right').

    Notes
    -----
    Two scales: heading smoothed over ``smooth_m`` finds sharp curves close together; smoothed
    over three times that, it finds long flat curves that noise breaks up at the first scale.
    A coarse-scale curve replaces the fine-scale pieces inside it when they all turn its way.
    """
    opts = DEFAULTS | (opts or {})
    poly = poly or Polyline(line)
    length = poly.length
    if length < 3 * opts["step_m"]:
        return pd.DataFrame(columns=HCURVE_COLUMNS)
    fine = _detect(line, opts, opts["smooth_m"], poly)
    coarse = _detect(line, opts, 3 * opts["smooth_m"], poly) if length > 6 * opts["smooth_m"] else []
    rows = list(fine)
    for c in coarse:
        inside = [f for f in rows if f["end_m"] > c["start_m"] - opts["smooth_m"]
                  and f["start_m"] < c["end_m"] + opts["smooth_m"]]
        if all(f["direction"] == c["direction"] for f in inside) and (len(inside) != 1 or
                                                                     inside[0]["deflection_deg"] < 0.8 * c["deflection_deg"]):
            rows = [f for f in rows if f not in inside] + [c]
    rows.sort(key=lambda r: r["start_m"])
    frame = pd.DataFrame(rows, columns=HCURVE_COLUMNS[1:])
    frame.insert(0, "hcurve_no", np.arange(1, len(frame) + 1))
    return frame


def min_radius_m(speed_kmh, e_max: float, f_max) -> np.ndarray:
    """Minimum radius of a horizontal curve for a design speed (metric).

    Parameters
    ----------
    speed_kmh : array_like
        Speed V (km/h).
    e_max : float
        Maximum superelevation e (fraction).
    f_max : array_like
        Side friction factor f (fraction), tabulated by speed.

    Returns
    -------
    ndarray
        ``R_min = V^2 / (127 (e + f))`` (m).

    References
    ----------
    AASHTO, *A Policy on Geometric Design of Highways and Streets* (Green Book), 7th ed., 2018,
    ch. 3.
    """
    v = np.asarray(speed_kmh, dtype=float)
    return v**2 / (127.0 * (e_max + np.asarray(f_max, dtype=float)))


def min_radius_ft(speed_mph, e_max: float, f_max) -> np.ndarray:
    """Minimum radius of a horizontal curve for a design speed (US customary).

    Parameters
    ----------
    speed_mph : array_like
        Speed V (mph).
    e_max : float
        Maximum superelevation e (fraction).
    f_max : array_like
        Side friction factor f (fraction).

    Returns
    -------
    ndarray
        ``R_min = V^2 / (15 (e + f))`` (ft).

    References
    ----------
    AASHTO, *A Policy on Geometric Design of Highways and Streets* (Green Book), 7th ed., 2018,
    ch. 3.
    """
    v = np.asarray(speed_mph, dtype=float)
    return v**2 / (15.0 * (e_max + np.asarray(f_max, dtype=float)))


def sight_line_offset(radius, sight):
    """Horizontal sight line offset needed on a curve for a sight distance.

    Parameters
    ----------
    radius : array_like
        Radius R of the centre of the inside lane (m, or any length unit).
    sight : array_like
        Sight distance S (same unit).

    Returns
    -------
    ndarray
        ``HSO = R (1 - cos(28.65 S / R))``, angle in degrees (same unit as R); the lateral
        clearance from the centre of the inside lane, valid while S is shorter than the curve.

    References
    ----------
    AASHTO, *A Policy on Geometric Design of Highways and Streets* (Green Book), 7th ed., 2018,
    ch. 3.
    """
    R = np.asarray(radius, dtype=float)
    S = np.asarray(sight, dtype=float)
    return R * (1.0 - np.cos(np.radians(28.65 * S / R)))
