"""Results of ``POST /v1/fit``: the report's sections as frozen dataclasses."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

from curvewise_client.results.base import empty_mapping, items, of, register
from curvewise_client.results.plain import Result


@dataclass(frozen=True, slots=True, repr=False)
class ModelInfo(Result):
    """The fitted model: family, degree and term names in order (a built-in curve's x
    scale in ``scale``: ``"log"`` or ``"linear"``)."""

    family: str | None = None
    degree: int | None = None
    intercept: bool | None = None
    terms: tuple[str, ...] = ()
    transform_x: str | None = None
    transform_y: str | None = None
    expression: str | None = None
    weighting: str | None = None
    scale: str | None = None


@dataclass(frozen=True, slots=True, repr=False)
class Coefficient(Result):
    """One coefficient in the raw x scale (or a nonlinear parameter by name), with its
    confidence limits; nonlinear fits add profile-likelihood limits and their status."""

    term: str
    estimate: float | None = None
    std_error: float | None = None
    t: float | None = None
    p_value: float | None = None
    lower: float | None = None
    upper: float | None = None
    profile_lower: float | None = None
    profile_upper: float | None = None
    profile_lower_status: str | None = None
    profile_upper_status: str | None = None


@dataclass(frozen=True, slots=True, repr=False)
class DerivedQuantity(Result):
    """A quantity computed from one parameter (e.g. a half-life from a rate constant), with
    its delta-method standard error, Wald limits and mapped profile limits."""

    name: str
    meaning: str = ""
    parameter: str | None = None
    estimate: float | None = None
    std_error: float | None = None
    lower: float | None = None
    upper: float | None = None
    profile_lower: float | None = None
    profile_upper: float | None = None
    profile_lower_status: str | None = None
    profile_upper_status: str | None = None


@dataclass(frozen=True, slots=True, repr=False)
class FitInfo(Result):
    """How a nonlinear fit was started, how it converged and why it stopped."""

    started_from: str | None = None
    start: tuple[float, ...] = ()
    method: str | None = None
    iterations: int | None = None
    function_evaluations: int | None = None
    jacobian_evaluations: int | None = None
    termination: str | None = None
    message: str = ""
    converged: bool | None = None
    relative_offset: float | None = None
    gradient_norm: float | None = None
    bound_status: tuple[str, ...] = ()
    jacobian_rank: int | None = None
    condition_number: float | None = None
    start_strategy: str | None = None
    starts_tried: int | None = None


@dataclass(frozen=True, slots=True, repr=False)
class AnovaRow(Result):
    """One row of the sequential table; the residual row has no ``f``/``p_value``."""

    term: str
    df: int | None = None
    sum_of_squares: float | None = None
    mean_square: float | None = None
    f: float | None = None
    p_value: float | None = None


@dataclass(frozen=True, slots=True, repr=False)
class Statistics(Result):
    """Whole-fit statistics (``None`` where undefined or not sent)."""

    n: int | None = None
    n_parameters: int | None = None
    df_model: int | None = None
    df_residual: int | None = None
    rss: float | None = None
    tss: float | None = None
    centred: bool | None = None
    r_squared: float | None = None
    adj_r_squared: float | None = None
    sigma: float | None = None
    f: float | None = None
    f_p_value: float | None = None
    log_likelihood: float | None = None
    aic: float | None = None
    aicc: float | None = None
    bic: float | None = None
    press: float | None = None
    press_r_squared: float | None = None
    condition_number: float | None = None


@dataclass(frozen=True, slots=True, repr=False)
class Candidate(Result):
    """One candidate degree in the selection trail, with every criterion."""

    degree: int
    df_residual: int | None = None
    rss: float | None = None
    sigma: float | None = None
    r_squared: float | None = None
    adj_r_squared: float | None = None
    aic: float | None = None
    aicc: float | None = None
    bic: float | None = None
    press: float | None = None
    f_last: float | None = None
    p_last: float | None = None


@dataclass(frozen=True, slots=True, repr=False)
class Selection(Result):
    """How the degree was chosen, with the candidate trail."""

    method: str | None = None
    chosen_degree: int | None = None
    candidates: tuple[Candidate, ...] = ()
    reason: str | None = None
    alpha: float | None = None


@dataclass(frozen=True, slots=True, repr=False)
class Grid(Result):
    """The fitted curve and its bands on the requested grid (aligned tuples)."""

    x: tuple[float, ...] = ()
    fit: tuple[float | None, ...] = ()
    mean_lower: tuple[float | None, ...] = ()
    mean_upper: tuple[float | None, ...] = ()
    obs_lower: tuple[float | None, ...] = ()
    obs_upper: tuple[float | None, ...] = ()
    se_mean: tuple[float | None, ...] = ()
    band_lower: tuple[float | None, ...] = ()
    band_upper: tuple[float | None, ...] = ()
    extrapolated: tuple[bool, ...] = ()
    unbounded: tuple[bool, ...] = ()
    level: float | None = None


@dataclass(frozen=True, slots=True, repr=False)
class Notice(Result):
    """A warning about the data or the numerics (``code`` is stable snake_case)."""

    code: str
    message: str = ""


@dataclass(frozen=True, slots=True, repr=False)
class TrustFlag(Result):
    """A plain-language reason to be careful with this fit, with the numbers behind it."""

    code: str
    severity: str | None = None
    message: str = ""
    evidence: Mapping[str, Any] = field(default_factory=empty_mapping)


@dataclass(frozen=True, slots=True, repr=False)
class TestResult(Result):
    """A formal assumption test (e.g. ``shapiro_wilk``)."""

    name: str
    statistic: float | None = None
    p_value: float | None = None
    df: tuple[float, ...] | None = None
    note: str = ""


@dataclass(frozen=True, slots=True, repr=False)
class Diagnostics(Result):
    """Per-point residual forms and influence (aligned with ``index``), tests, flagged points."""

    index: tuple[int, ...] = ()
    residuals: tuple[float | None, ...] = ()
    standardized: tuple[float | None, ...] = ()
    studentized: tuple[float | None, ...] = ()
    leverage: tuple[float | None, ...] = ()
    cooks_distance: tuple[float | None, ...] = ()
    dffits: tuple[float | None, ...] = ()
    tests: tuple[TestResult, ...] = ()
    lack_of_fit: Mapping[str, Any] | None = None
    outliers: tuple[int, ...] = ()
    high_leverage: tuple[int, ...] = ()
    influential: tuple[int, ...] = ()
    thresholds: Mapping[str, Any] = field(default_factory=empty_mapping)


@dataclass(frozen=True, slots=True)
class ComparedModel:
    """One candidate of a comparison of model families (NaN/None where it failed)."""

    label: str
    family: str | None = None
    n_parameters: int | None = None
    rss: float | None = None
    df_residual: int | None = None
    sigma: float | None = None
    aic: float | None = None
    aicc: float | None = None
    bic: float | None = None
    converged: bool | None = None
    flags: tuple[str, ...] = ()
    error: str | None = None


@dataclass(frozen=True, slots=True)
class NestedTest:
    """Extra-sum-of-squares F test of a candidate against a richer one containing it."""

    simpler: str
    richer: str
    f: float | None = None
    df_numerator: int | None = None
    df_denominator: int | None = None
    p_value: float | None = None


@dataclass(frozen=True, slots=True)
class Comparison:
    """How ``model.candidates`` were compared, and which one the report is about."""

    select: str | None = None
    alpha: float | None = None
    chosen: str | None = None
    chosen_index: int | None = None
    reason: str = ""
    candidates: tuple[ComparedModel, ...] = ()
    nested_tests: tuple[NestedTest, ...] = ()


@dataclass(frozen=True, slots=True, repr=False)
class FitResult(Result):
    """The answer of ``POST /v1/fit``.

    ``fitted_model`` is the portable document: store it as it is and hand it
    to :meth:`Client.predict` / :meth:`Client.invert` later.
    """

    model: ModelInfo | None = None
    n: int | None = None
    n_input: int | None = None
    dropped: tuple[int, ...] = ()
    coefficients: tuple[Coefficient, ...] = ()
    anova: tuple[AnovaRow, ...] = ()
    statistics: Statistics | None = None
    selection: Selection | None = None
    fit_info: FitInfo | None = None
    derived: tuple[DerivedQuantity, ...] = ()
    correlation: tuple[tuple[float | None, ...], ...] = ()
    diagnostics: Diagnostics | None = None
    grid: Grid | None = None
    warnings: tuple[Notice, ...] = ()
    flags: tuple[TrustFlag, ...] = ()
    fitted_model: Mapping[str, Any] | None = None
    comparison: Comparison | None = None
    raw: Mapping[str, Any] = field(default_factory=empty_mapping)

    @property
    def chosen_degree(self) -> int | None:
        """The degree that was fitted (chosen or fixed)."""
        if self.selection is not None and self.selection.chosen_degree is not None:
            return self.selection.chosen_degree
        return self.model.degree if self.model else None


register(FitResult, model=of(ModelInfo), coefficients=items(of(Coefficient)),
         anova=items(of(AnovaRow)), statistics=of(Statistics), selection=of(Selection),
         grid=of(Grid), diagnostics=of(Diagnostics), warnings=items(of(Notice)),
         flags=items(of(TrustFlag)), fit_info=of(FitInfo), comparison=of(Comparison),
         derived=items(of(DerivedQuantity)))
register(Comparison, candidates=items(of(ComparedModel)), nested_tests=items(of(NestedTest)))
register(Selection, candidates=items(of(Candidate)))
register(Diagnostics, tests=items(of(TestResult)))
