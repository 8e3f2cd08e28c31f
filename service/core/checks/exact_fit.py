"""A stored fit with no residual variance (sigma = 0) gives no intervals.

A curve that passes through every point (an exact fit: ``sigma`` stored as 0) has no
estimate of the noise, so every band and calibration interval computed from it would
have zero width, claiming a certainty the data cannot give. Predictions from such a
model keep the fitted values and give their standard errors and limits as NaN (null on
the wire) with the notice :data:`NO_RESIDUAL_VARIANCE`; readings read back keep their
x estimate with the status of the same name and no limits
(:mod:`service.core.models.inverse`, :mod:`service.core.models.curve_reader`).
"""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np

from service.core.checks.known_sd import KNOWN_SD
from service.core.results import Notice, Prediction, frozen_array

NO_RESIDUAL_VARIANCE = "no_residual_variance"
MESSAGE = ("The fit passes through every point (sigma = 0): the data give no estimate of the "
           "noise, so no interval can be given; the values are the curve's only. Measure "
           "replicates or more points than parameters to get intervals.")
FIGURES_REASON = ("The fit passes through every point (sigma = 0): no estimate of the noise, "
                  "so detection and quantification limits cannot be given.")
_LIMITS = ("se_mean", "mean_lower", "mean_upper", "obs_lower", "obs_upper", "band_lower",
           "band_upper")


def no_residual_variance(fitted) -> bool:
    """Whether the stored fit has sigma exactly 0 (never with known SDs: the noise is known).

    Parameters
    ----------
    fitted : FittedPolynomial or FittedCurve
        Any family's fitted model (both carry ``sigma``).
    """
    if fitted.weighting == KNOWN_SD:  # the noise is known: the bands stand
        return False
    sigma = float(fitted.sigma)
    return not math.isnan(sigma) and sigma == 0.0


def without_intervals(fitted, prediction: Prediction) -> Prediction:
    """``prediction`` unchanged, or, for a fit without residual variance, with its
    standard errors and limits NaN and the ``no_residual_variance`` notice.

    Parameters
    ----------
    fitted : FittedPolynomial or FittedCurve
        The model the prediction came from.
    prediction : Prediction
        Its predictions.

    Returns
    -------
    Prediction
    """
    if not no_residual_variance(fitted):
        return prediction
    blank = {name: frozen_array(np.full(np.shape(getattr(prediction, name)), np.nan))
             for name in _LIMITS}
    notices = (*prediction.notices, Notice(NO_RESIDUAL_VARIANCE, MESSAGE))
    unbounded = None if prediction.unbounded is None else frozen_array(
        np.zeros(np.shape(prediction.unbounded), dtype=bool), dtype=bool)
    return replace(prediction, **blank, unbounded=unbounded, notices=notices)
