"""Reading x back from an observed y with a nonlinear family's fitted curve.

For a reading ``y0`` (the mean of ``m`` replicate readings) the estimate is the x
in the calibrated range ``[x_min, x_max]`` where the fitted curve ``f`` equals
``y0``, found by Brent's bracketed root finder on a sign change of ``f - y0``
located on a dense grid (``GRID_POINTS`` over the range). Whether the curve is
monotone over the range is judged on the same grid from its exact derivative
``df/dx`` (:meth:`ExpressionModel.derivative_x`); where the slope changes sign the
turning point is found by Brent's method on ``df/dx``.

The calibration interval is the classical one (Eisenhart 1939, as for the
polynomials; see :mod:`service.core.models.inverse`): the piece containing the
estimate of the set of x whose band for the mean of ``m`` new readings
(:func:`service.core.nonlinear.analysis.predict`, delta method) contains ``y0``.
Each limit is where ``max(lower(x) - y0, y0 - upper(x))`` first turns positive
moving away from the estimate, bracketed on the grid (and beyond the range on a
geometric ladder up to ``FAR_WIDTHS`` range widths) and refined by Brent's method.

A reading the curve reaches only outside the range is ``outside_range`` (that x
in ``other_roots``); one it never reaches within ``FAR_WIDTHS`` range widths (beyond
an asymptote) is ``no_real_root``. The statuses are those of the polynomials
(:data:`service.core.models.inverse.STATUSES`).

:func:`invert_curve` runs this search for all readings together
(:mod:`service.core.models.curve_batch`); :meth:`CurveReader.read
<service.core.models.curve_reader.CurveReader.read>`, the search for one reading, is its
fallback and its reference. The reader (:mod:`service.core.models.curve_reader`) holds
the grid, the bands, the ladder and that search, with ``GRID_POINTS`` and ``FAR_WIDTHS``.
"""

from __future__ import annotations

import numpy as np

from service.core.data.reading_weights import reading_weights
from service.core.errors import DataError, SpecError
from service.core.models.curve_batch import read_all
from service.core.models.curve_reader import CurveReader, sensitivity
from service.core.models.inverse import Inversion, _replicates
from service.core.nonlinear.report import FittedCurve

__all__ = ["invert_curve", "sensitivity"]


def invert_curve(fitted: FittedCurve, y, *, replicates=1, level: float | None = None,
                 weights=None) -> Inversion:
    """Estimate x for each observed y, with classical calibration intervals.

    Parameters
    ----------
    fitted : FittedCurve
        The calibration curve of a nonlinear family.
    y : array_like
        Observed readings; each the mean of its ``replicates`` readings.
    replicates : int or array_like of int
        ``m`` for every reading, or one count per reading (>= 1).
    level : float, optional
        Interval level; defaults to the fit's level.
    weights : array_like, optional
        The weight of each reading on the fit's weight scale (default 1): each of its
        ``m`` readings has variance ``noise_variance / weight``.

    Returns
    -------
    Inversion
        ``monotone`` and ``turning_points`` judged over the calibrated range.

    Raises
    ------
    SpecError
        Bad level, replicates, or a range of a single point.
    DataError
        Non-finite readings, or weights not one finite positive number per reading.
    """
    level = fitted.level if level is None else float(level)
    if not 0 < level < 1:
        raise SpecError("level must lie strictly between 0 and 1.", field="level",
                        fix="Use e.g. 0.95.")
    if not fitted.x_min < fitted.x_max:
        raise SpecError("A curve fitted at a single x cannot be read backwards.",
                        field="fitted_model.x_min", fix="Fit the calibration at several x.")
    y = np.atleast_1d(np.asarray(y, dtype=float))
    if not np.all(np.isfinite(y)):
        bad = int(np.flatnonzero(~np.isfinite(y))[0])
        raise DataError(f"y[{bad}] is not a finite number.", field=f"y[{bad}]",
                        fix="Send finite readings only.")
    m = _replicates(replicates, len(y))
    w = reading_weights(weights, len(y))
    with np.errstate(all="ignore"):
        reader = CurveReader(fitted, level)
        estimates = read_all(reader, y, np.asarray(m), w)
    return Inversion(estimates, level, reader.monotone, reader.turning_points,
                     fitted.x_min, fitted.x_max)
