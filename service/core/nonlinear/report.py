"""Frozen results of a nonlinear family's fit: the parameter table, how the fit was reached,
and the fitted curve kept for later prediction.

The parameter rows extend the polynomial coefficient rows (same first seven
fields) with profile-likelihood limits and the status of each side:
``"found"``, ``"bound"`` (the limit is a bound the caller set: the profile stays
below the critical value up to it), ``"unbounded"`` (the profile never reaches
the critical value: the data do not bound the parameter on that side; the limit
is NaN) or
``"not_computed"`` (NaN; the fit's notices say why).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, NamedTuple

import numpy as np

from service.core.results import Diagnostics, FitStatistics, Notice, Prediction, TrustFlag


class ParameterRow(NamedTuple):
    """One parameter: estimate, standard error, t, p, Wald and profile limits."""

    term: str
    estimate: float
    std_error: float
    t: float
    p_value: float
    lower: float
    upper: float
    profile_lower: float
    profile_upper: float
    profile_lower_status: str
    profile_upper_status: str


@dataclass(frozen=True, slots=True)
class FitInfo:
    """How the fit was started, how it converged and why it stopped.

    ``started_from`` is ``"given"`` (the caller's start values) or ``"automatic"``
    (a built-in family's own starts); ``start_strategy`` names the start the
    reported fit came from (``"given"``, or e.g. ``"grid_best"``, ``"shape"``) and
    ``starts_tried`` how many starts were solved before the best converged fit
    was kept. ``termination`` is the solver's stable code (``relative_offset``,
    ``small_gradient`` and ``small_step`` mean converged); ``relative_offset``
    is the Bates & Watts (1981) criterion at the end, ``gradient_norm`` the
    largest cosine between the residuals and a Jacobian column; ``bound_status``
    holds ``"free"``, ``"lower"`` or ``"upper"`` per parameter.
    """

    started_from: str  # "given" | "automatic"
    start: tuple[float, ...]
    method: str
    iterations: int
    function_evaluations: int
    jacobian_evaluations: int
    termination: str
    message: str
    converged: bool
    relative_offset: float
    gradient_norm: float
    bound_status: tuple[str, ...]
    jacobian_rank: int
    condition_number: float
    start_strategy: str = "given"
    starts_tried: int = 1


class DerivedRow(NamedTuple):
    """A quantity derived from one parameter (e.g. a half-life from a rate constant).

    ``std_error`` is the delta-method standard error, ``lower``/``upper`` the Wald
    limits around the estimate with it; the profile limits are the parameter's
    own profile limits mapped through the (monotone) function, so they are exact
    profile-likelihood limits of the derived quantity too. A side is
    ``"unbounded"`` (NaN) when the parameter's limit leaves the range where the
    function is finite and monotone.
    """

    name: str
    meaning: str
    parameter: str
    estimate: float
    std_error: float
    lower: float
    upper: float
    profile_lower: float
    profile_upper: float
    profile_lower_status: str
    profile_upper_status: str


@dataclass(frozen=True, slots=True)
class FittedCurve:
    """Everything needed to predict from a nonlinear fit later, exactly.

    ``model`` is the compiled equation (``values_and_jacobian``); ``expression``
    its canonical text. ``covariance`` is the parameter covariance the bands
    use, ``noise_variance`` the variance of one new observation at unit weight
    (``sigma²``; 1 with known SDs) and ``distribution`` the reference
    distribution of the limits (``"t"`` on ``df_residual``, or ``"normal"``).
    """

    family: str
    expression: str
    parameter_names: tuple[str, ...]
    estimates: np.ndarray
    covariance: np.ndarray
    sigma: float
    noise_variance: float
    df_residual: int
    n: int
    x_min: float
    x_max: float
    weighted: bool
    weighting: str
    distribution: str
    level: float
    model: Any


@dataclass(frozen=True, slots=True)
class NonlinearReport:
    """The full analysis of one series by a nonlinear family, computed once."""

    model: FittedCurve
    n_input: int
    dropped: tuple[int, ...]
    coefficients: tuple[ParameterRow, ...]
    correlation: np.ndarray
    statistics: FitStatistics
    fit_info: FitInfo
    diagnostics: Diagnostics | None
    grid: Prediction | None
    flags: tuple[TrustFlag, ...]
    warnings: tuple[Notice, ...]
    derived: tuple[DerivedRow, ...] = ()
