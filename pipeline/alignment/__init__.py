"""The vertical alignment recovered from a profile, with each curve's uncertainty.

Modules: :mod:`.model` (the alignment and its design matrix), :mod:`.segmentation` (noise,
straight pieces, first PVIs), :mod:`.local` (local least-squares problems),
:mod:`.selection` (model selection), :mod:`.optimisation` (least squares), :mod:`.curves`
(the curve table), :mod:`.fit` (a stretch, a road) and :mod:`.uncertainty`.
"""

from .fit import (Alignment, RoadProfile, _jacobian, empty_curves, fit_profile, model_grade, model_z, noise_sigma,
                  segment_lines)

__all__ = ["Alignment", "RoadProfile", "_jacobian", "empty_curves", "fit_profile", "model_grade", "model_z",
           "noise_sigma", "segment_lines"]
