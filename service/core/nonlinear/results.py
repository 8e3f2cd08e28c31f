"""Frozen result types of the nonlinear least-squares engine.

Numbers only: undefined statistics are ``float('nan')``; arrays are read-only
numpy arrays; nothing is mutated after construction. Table rows are named
tuples, containers are frozen slotted dataclasses. Numerical warnings are
:class:`Notice` rows (stable snake_case ``code`` plus a plain message), never
prints or Python warnings.

Sign and weighting conventions used throughout: residuals are ``y - f(x, theta)``;
weights ``w`` are inverse variances (relative, or known when the weight mode is
``"known_sd"``); weighted residuals are ``sqrt(w) * (y - f)``; ``rss`` is the
weighted residual sum of squares.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, NamedTuple

import numpy as np

FloatArray = np.ndarray  # read-only float64


def frozen(values, dtype=float) -> np.ndarray:
    """A read-only float64 (or ``dtype``) array holding ``values``."""
    arr = np.array(values, dtype=dtype)
    arr.setflags(write=False)
    return arr


class Notice(NamedTuple):
    """A numerical warning turned into data (``code`` is stable snake_case)."""

    code: str
    message: str


class Attempt(NamedTuple):
    """One run of a minimisation strategy inside :func:`solve` (for the record).

    ``method`` is ``"lm"``, ``"trf"`` or ``"dogbox"`` (scipy's trust-region
    methods) with ``x_scale`` ``"jac"`` or ``"unit"``; ``outcome`` is the
    termination code the run plus polish reached; ``rss`` the weighted residual
    sum of squares at its end.
    """

    method: str
    x_scale: str
    outcome: str
    rss: float
    iterations: int
    nfev: int


@dataclass(frozen=True, slots=True)
class Solution:
    """Least-squares estimates and how the solver got there.

    ``termination`` is one of ``"relative_offset"`` (Bates & Watts criterion
    met), ``"small_gradient"`` (projected residual at the rounding level, e.g.
    an exact fit), ``"small_step"`` (the Gauss-Newton correction is below the
    float64 resolution of the estimates) -- these three mean ``converged`` --
    or ``"iteration_limit"``, ``"non_finite_model"``, ``"singular_jacobian"``,
    ``"diverged"``, ``"stalled"``. ``relative_offset`` is
    ``(||Q1' r|| / sqrt(p)) / (||r - Q1 Q1' r|| / sqrt(n - p))`` on the weighted,
    column-scaled Jacobian; ``gradient_norm`` the largest cosine between the
    weighted residuals and a weighted Jacobian column. ``bound_status`` holds
    ``"free"``, ``"lower"`` or ``"upper"`` per parameter. ``rank`` and
    ``condition_number`` are those of the weighted Jacobian after scaling each
    column to unit length (free parameters only). ``jacobian`` is the model's
    (unweighted) Jacobian at the estimates. ``iterations`` counts Jacobian
    evaluations over every phase (one per accepted step), ``nfev`` model
    evaluations.
    """

    problem: Any  # the service.core.nonlinear.problem.Problem it solved (built on these types)
    parameter_names: tuple[str, ...]
    start: FloatArray
    estimates: FloatArray
    fitted: FloatArray
    residuals: FloatArray
    weighted_residuals: FloatArray
    jacobian: np.ndarray
    rss: float
    iterations: int
    nfev: int
    njev: int
    termination: str
    message: str
    converged: bool
    relative_offset: float
    gradient_norm: float
    bound_status: tuple[str, ...]
    rank: int
    condition_number: float
    attempts: tuple[Attempt, ...]
    notices: tuple[Notice, ...]


class ParameterEstimate(NamedTuple):
    """One parameter: estimate, standard error, test of zero, Wald limits."""

    name: str
    estimate: float
    std_error: float
    statistic: float
    p_value: float
    lower: float
    upper: float


class GoodnessOfFit(NamedTuple):
    """Chi-square test of the weighted RSS against ``chi2(df)`` (known-SD weights only)."""

    statistic: float
    df: int
    p_value: float
    alpha: float
    rejected: bool


@dataclass(frozen=True, slots=True)
class Inference:
    """Tangent-plane (linear-approximation) inference at the estimates.

    ``weight_mode`` is ``"relative"`` (sigma estimated from the residuals,
    Student t on ``df_residual``) or ``"known_sd"`` (weights are 1/SD^2 of a
    known error: covariance ``(J'WJ)^-1``, normal quantiles, chi-square
    goodness of fit). ``covariance_scale`` is the factor applied to
    ``(J'WJ)^-1`` (``sigma**2`` or 1). ``r_squared`` is ``1 - RSS/TSS`` about
    the weighted mean; for nonlinear models it is not a reliable measure of fit
    (Spiess & Neumeyer 2010) and is reported for orientation only.
    ``leverage`` is the diagonal of the tangent-plane hat matrix of
    ``sqrt(W) J``. Covariance, correlation and standard errors are NaN when the
    Jacobian is rank deficient.
    """

    parameters: tuple[ParameterEstimate, ...]
    covariance: np.ndarray
    correlation: np.ndarray
    weight_mode: str
    distribution: str  # "t" | "normal"
    level: float
    critical_value: float
    n: int
    n_parameters: int
    df_residual: int
    rss: float
    sigma: float
    covariance_scale: float
    tss: float
    r_squared: float
    log_likelihood: float
    aic: float
    aicc: float
    bic: float
    leverage: FloatArray
    rank: int
    condition_number: float
    goodness_of_fit: GoodnessOfFit | None
    notices: tuple[Notice, ...]


class ProfileLimit(NamedTuple):
    """Profile-likelihood limits of one parameter.

    ``lower_status``/``upper_status`` are ``"found"``, ``"bound"`` (the profile
    stays below the critical value up to a bound the caller set, or the estimate
    is on it: the limit is that bound), ``"unbounded"`` (the profile does not
    reach the critical value within the search; the limit is NaN) or
    ``"not_computed"`` (NaN; ``reason`` says why). ``refits`` counts
    constrained re-minimisations spent on this parameter.
    """

    name: str
    estimate: float
    lower: float
    upper: float
    lower_status: str
    upper_status: str
    reason: str
    refits: int


@dataclass(frozen=True, slots=True)
class ProfileLimits:
    """Profile-likelihood limits of every parameter at one level.

    The profile t statistic is
    ``tau(b_j) = sign(b_j - est_j) sqrt(S~(b_j) - S(est)) / s``; limits are where
    ``|tau| = critical_value`` (Student t on ``df`` in the relative weight mode,
    normal with ``s = 1`` in the known-SD mode).
    """

    limits: tuple[ProfileLimit, ...]
    level: float
    critical_value: float
    weight_mode: str
    notices: tuple[Notice, ...]


@dataclass(frozen=True, slots=True)
class Bands:
    """Predictions with delta-method bands at new x.

    ``mean_*``: confidence band for the mean response; ``obs_*``: band for
    the mean of ``replicates`` new observations taken at unit weight.
    ``extrapolated`` marks x outside the fitted data's range (any column).
    Points where the model is not finite are NaN (see ``notices``).
    """

    x: np.ndarray
    fit: FloatArray
    se_fit: FloatArray
    mean_lower: FloatArray
    mean_upper: FloatArray
    obs_lower: FloatArray
    obs_upper: FloatArray
    extrapolated: np.ndarray  # bool
    level: float
    critical_value: float
    replicates: int
    notices: tuple[Notice, ...]
