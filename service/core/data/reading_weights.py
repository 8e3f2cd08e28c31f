"""The weight of a new reading, for observation bands and calibration intervals.

A fit with weights ``w`` estimates ``sigma^2``, the variance of a reading of weight 1
(relative weights), so a reading of weight ``w`` has variance ``sigma^2 / w`` and the mean
of ``m`` such readings ``sigma^2 / (m w)``. With known standard deviations (weights
``1/sd^2``, sigma fixed at 1) the weight of a new reading is ``1/sd^2`` of that reading, in
the units of the fit's weights. Absent weights mean weight 1 for every reading.
"""

from __future__ import annotations

import numpy as np

from service.core.errors import DataError

WEIGHTS_FIX = ("Send one weight per value, each finite and > 0: the weight a new reading "
               "there carries on the fit's weight scale (e.g. 1/y^2 for a fit weighted 1/y^2; "
               "1/sd^2 of the reading for a fit with known standard deviations).")


def reading_weights(weights, count: int, *, field: str = "weights") -> np.ndarray | None:
    """The weights of ``count`` new readings as float64, or None when not given.

    Parameters
    ----------
    weights : array_like or None
        One weight per reading (or per x of a prediction).
    count : int
        How many readings (x values) there are.
    field : str
        The request field named in errors.

    Returns
    -------
    ndarray or None
        The weights (a fresh array), None when ``weights`` is None.

    Raises
    ------
    DataError
        Wrong length, or an element not finite and > 0 (naming ``weights[i]``).
    """
    if weights is None:
        return None
    try:
        w = np.array(weights, dtype=float, ndmin=1)
    except (TypeError, ValueError) as exc:
        raise DataError(f"{field} must be a list of numbers.", field=field,
                        fix=WEIGHTS_FIX) from exc
    if w.shape != (count,):
        raise DataError(f"{field} has {w.size} values for {count} readings.", field=field,
                        fix=WEIGHTS_FIX)
    with np.errstate(invalid="ignore"):
        bad = np.flatnonzero(~(np.isfinite(w) & (w > 0)))
    if bad.size:
        i = int(bad[0])
        raise DataError(f"{field}[{i}] = {float(w[i])!r} is not a finite number > 0.",
                        field=f"{field}[{i}]", fix=WEIGHTS_FIX)
    return w
