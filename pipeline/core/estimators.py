"""The statistical estimators the stages share, each named and cited.

References
----------
Hampel, F. R. (1974). The influence curve and its role in robust estimation. *Journal of the
American Statistical Association* 69(346), 383-393 (the median absolute deviation, scaled by
1.4826 to estimate a normal standard deviation).

Gasser, T., Sroka, L. and Jennen-Steinmetz, C. (1986). Residual variance and residual pattern
in nonlinear regression. *Biometrika* 73(3), 625-633 (noise estimated from differences of
neighbouring samples, which a smooth signal barely affects).
"""

from __future__ import annotations

import numpy as np


def mad_sigma(values: np.ndarray) -> float:
    """Robust standard deviation of a sample: 1.4826 times its median absolute deviation.

    Parameters
    ----------
    values : ndarray
        The sample (any unit); must not hold NaN.

    Returns
    -------
    float
        ``1.4826 median(|x - median(x)|)``, in the unit of ``values``.

    Notes
    -----
    For normally distributed values the MAD is 0.6745 sigma, hence the factor 1.4826 = 1 /
    0.6745; the estimate ignores up to half the sample being outliers (breakdown point 50 %).

    References
    ----------
    Hampel (1974), see the module references.
    """
    return 1.4826 * np.median(np.abs(values - np.median(values)))


def second_difference_sd(sigma: float, times: float = 1.0) -> float:
    """Standard deviation of a second difference ``z[i-1] - 2 z[i] + z[i+1]`` of white noise.

    Parameters
    ----------
    sigma : float
        Standard deviation of the noise on each sample (m).
    times : float, default 1.0
        Multiple of that standard deviation wanted (a threshold in standard deviations).

    Returns
    -------
    float
        ``times sqrt(6) sigma`` (m).

    Notes
    -----
    With independent noise of variance sigma^2 the second difference has variance
    ``(1 + 4 + 1) sigma^2 = 6 sigma^2``: the normalisation of the second-difference
    pseudo-residuals of Gasser, Sroka & Jennen-Steinmetz (1986).

    References
    ----------
    Gasser et al. (1986), see the module references.
    """
    return times * np.sqrt(6.0) * sigma
