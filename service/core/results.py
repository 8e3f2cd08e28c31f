"""Frozen result types returned by the core.

The core returns numbers only: undefined statistics are ``float('nan')``
(the schemas turn them into JSON null), arrays are read-only numpy arrays.
Nothing here is mutated after construction. Indices into the data always
refer to positions in the caller's *original* arrays (before any dropping).

Table rows (coefficients, ANOVA rows, candidates, tests, flags, notices) are
named tuples: immutable, with named fields, and about three times cheaper to
build than frozen dataclasses (a fit builds a dozen of them). The containers
are frozen, slotted dataclasses.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from typing import NamedTuple

import numpy as np

FloatArray = np.ndarray  # 1-D float64, read-only
Evidence = Mapping[str, float | int | str | bool | tuple]


def frozen_array(values, dtype=float) -> np.ndarray:
    """Return a read-only 1-D (or 2-D) copy-free view of ``values``."""
    arr = np.asarray(values, dtype=dtype)
    arr.setflags(write=False)
    return arr


def frozen_rows(values: np.ndarray) -> list[np.ndarray]:
    """Read-only row views of a 2-D float array (one flag change for all rows)."""
    values.setflags(write=False)
    return list(values)


class Notice(NamedTuple):
    """A numerical or data warning turned into data (``code`` is stable snake_case)."""

    code: str
    message: str


class TrustFlag(NamedTuple):
    """A plain-language reason to be careful with this fit, with the evidence."""

    code: str
    severity: str  # "info" | "caution" | "serious"
    message: str
    evidence: Evidence


class Coefficient(NamedTuple):
    """One coefficient on the raw (transformed-if-asked) x scale."""

    term: str
    estimate: float
    std_error: float
    t: float
    p_value: float
    lower: float
    upper: float


class AnovaRow(NamedTuple):
    """One row of the sequential table; the residual row has nan f/p."""

    term: str
    df: int
    sum_of_squares: float
    mean_square: float
    f: float
    p_value: float


@dataclass(frozen=True, slots=True)
class FitStatistics:
    """Whole-fit statistics. ``centred`` is False without intercept (uncentred SS, R²)."""

    n: int
    n_parameters: int
    df_model: int
    df_residual: int
    rss: float
    tss: float
    centred: bool
    r_squared: float
    adj_r_squared: float
    sigma: float
    f: float
    f_p_value: float
    log_likelihood: float
    aic: float
    aicc: float
    bic: float
    press: float
    press_r_squared: float
    condition_number: float


class Candidate(NamedTuple):
    """One row of the selection trail (one candidate degree)."""

    degree: int
    df_residual: int
    rss: float
    sigma: float
    r_squared: float
    adj_r_squared: float
    aic: float
    aicc: float
    bic: float
    press: float
    f_last: float
    p_last: float


@dataclass(frozen=True, slots=True)
class Selection:
    """How the degree was chosen. ``method`` is ``"fixed"`` when the caller fixed it."""

    method: str
    chosen_degree: int
    reason: str
    alpha: float
    candidates: tuple[Candidate, ...]


@dataclass(frozen=True, slots=True)
class Prediction:
    """Fitted values and bands at a set of x (original y scale).

    ``mean_*``: confidence band for the mean; ``obs_*``: band for ``m`` new
    observations' mean (m = 1: one new observation); ``band_*``: simultaneous
    (Working-Hotelling) band for the whole curve. ``extrapolated`` marks x
    outside the fitted data range. With a transformed y, ``fit`` and the
    limits are back-transformed to the original y scale while ``se_mean``
    stays on the fitting (transformed) scale. ``unbounded`` marks x where a
    limit has no finite value on the original scale (the band reaches the pole
    of the ``reciprocal`` transform, or leaves the double range); that limit
    is NaN. None from families without it (read as all False). ``notices``: what the
    code that computed the values found wrong with them (``non_finite_prediction`` where the
    curve has no finite value, ``no_covariance`` where the bands are missing), for a report
    to pass on; empty when there is nothing to say.
    """

    x: FloatArray
    fit: FloatArray
    se_mean: FloatArray
    mean_lower: FloatArray
    mean_upper: FloatArray
    obs_lower: FloatArray
    obs_upper: FloatArray
    band_lower: FloatArray
    band_upper: FloatArray
    extrapolated: np.ndarray  # bool
    level: float
    unbounded: np.ndarray | None = None  # bool
    notices: tuple[Notice, ...] = ()


class TestResult(NamedTuple):
    """A formal assumption test."""

    name: str  # "shapiro_wilk" | "breusch_pagan" | "durbin_watson" | ...
    statistic: float
    p_value: float
    df: tuple[float, ...] | None
    note: str


@dataclass(frozen=True, slots=True)
class LackOfFit:
    """Lack-of-fit F test against pure error from replicated x."""

    df_lack: int
    ss_lack: float
    df_pure: int
    ss_pure: float
    f: float
    p_value: float
    n_levels: int


@dataclass(frozen=True, slots=True)
class Diagnostics:
    """Per-point residual forms and influence, formal tests, and flagged points.

    Arrays are aligned with ``index`` (original positions of the used points).
    """

    index: np.ndarray
    residuals: FloatArray
    standardized: FloatArray        # internally studentized
    studentized: FloatArray         # externally studentized
    leverage: FloatArray
    cooks_distance: FloatArray
    dffits: FloatArray
    tests: tuple[TestResult, ...]
    lack_of_fit: LackOfFit | None
    outliers: tuple[int, ...]
    high_leverage: tuple[int, ...]
    influential: tuple[int, ...]
    thresholds: Mapping[str, float]


@dataclass(frozen=True, slots=True)
class FittedPolynomial:
    """Everything needed to predict and invert later, exactly.

    The fit is computed on ``t = (u - x_shift) / x_scale`` where ``u`` is x
    after ``transform_x``. ``basis_coefficients`` are on powers of ``t``;
    ``r_factor`` is the upper-triangular R of the (weighted) design QR on
    that basis, so ``se_mean(t) = sigma * ||R^-T v(t)||``.
    ``raw_coefficients``/``raw_covariance`` are on powers of ``u``.

    Details fixed by the core: with an intercept ``x_shift``/``x_scale`` map
    the range of ``u`` onto [-1, 1]; without one ``x_shift`` is 0 and
    ``x_scale = max |u|``. ``v(t)`` holds the powers in entry order
    (``t^0..t^d``, or ``t^1..t^d`` without intercept). ``x_min``/``x_max``
    are on the caller's original x scale (extrapolation checks). ``sigma``
    is 0.0 for an exact fit and NaN when ``df_residual`` is 0. Weights are
    inverse variances; new observations in bands are taken at unit weight.
    ``weighting`` is ``"relative"`` (sigma estimated; limits on Student's t) or
    ``"known_sd"`` (weights are 1/SD²: ``sigma`` is 1 and limits use the
    normal distribution, :mod:`service.core.checks.known_sd`).
    """

    degree: int
    intercept: bool
    transform_x: str
    transform_y: str
    terms: tuple[str, ...]
    x_shift: float
    x_scale: float
    basis_coefficients: FloatArray
    r_factor: np.ndarray  # (p, p) upper triangular
    raw_coefficients: FloatArray
    raw_covariance: np.ndarray  # (p, p)
    sigma: float
    df_residual: int
    n: int
    x_min: float
    x_max: float
    weighted: bool
    level: float
    weighting: str = "relative"


@dataclass(frozen=True, slots=True)
class FitReport:
    """The full analysis of one series, computed once."""

    model: FittedPolynomial
    n_input: int
    dropped: tuple[int, ...]
    coefficients: tuple[Coefficient, ...]
    anova: tuple[AnovaRow, ...]
    statistics: FitStatistics
    selection: Selection
    diagnostics: Diagnostics | None
    grid: Prediction | None
    flags: tuple[TrustFlag, ...]
    warnings: tuple[Notice, ...]
