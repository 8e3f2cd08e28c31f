"""What a fitted model of each family can be asked when read backwards (GET /v1/families).

Derived from the registry entry (:class:`service.core.families.Family`): whether
``/v1/invert`` accepts its documents, whether it reports a working range (precision
profile) and whether detection limits can be computed, each with the condition that
decides it for one fit. The conditions restate those the code checks
(:mod:`~service.core.models.inverse`, :mod:`~service.core.models.curve_inverse`,
:mod:`~service.core.models.calibration`, :mod:`~service.core.models.curve_figures`,
:mod:`~service.core.models.precision_profile`).
"""

from __future__ import annotations

from typing import Any, NamedTuple

INVERT_POLYNOMIAL = ("Always; a reading with several roots in the calibrated range, or none, "
                     "gets its status (multiple_roots_in_range, outside_range, no_real_root).")
INVERT_CURVE = ("When the fitted curve is monotone over the calibrated range (checked per "
                "curve from its exact dy/dx; otherwise the answer says monotone false and the "
                "readings get not_monotone or multiple_roots_in_range).")
LIMITS_POLYNOMIAL = ("Straight-line and quadratic calibrations with an intercept, no "
                     "transforms and no weights, with residual df.")
LIMITS_CURVE = ("Unweighted fits with residual df whose curve is finite at the blank (x = 0) "
                "and strictly monotone from 0 to x_max.")
RANGE_PROFILE = ("Every fit with a positive calibrated range and a defined sigma: the x "
                 "range where the CV of a back-calculated x stays at or under cv_limit.")


class ReadingCapabilities(NamedTuple):
    """What /v1/invert answers for a family's fits, and when."""

    invertible: bool
    invert_condition: str
    working_range: bool
    working_range_condition: str
    detection_limit: bool
    detection_limit_condition: str


def capabilities(entry: Any) -> ReadingCapabilities:
    """The reading capabilities of one registry entry."""
    polynomial = entry.name == "polynomial"
    invertible = entry.invert is not None
    profile = entry.precision_profile is not None
    limits = entry.figures_of_merit is not None
    return ReadingCapabilities(
        invertible, (INVERT_POLYNOMIAL if polynomial else INVERT_CURVE) if invertible else "",
        profile, RANGE_PROFILE if profile else "",
        limits, (LIMITS_POLYNOMIAL if polynomial else LIMITS_CURVE) if limits else "")
