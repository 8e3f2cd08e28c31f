"""Typed, frozen results mirroring the service's JSON answers.

Every field has the wire name. JSON ``null`` (an undefined statistic) is
``None``; JSON arrays become tuples and objects become read-only mappings, so
a result cannot be changed after it is built. Top-level results also keep the
whole decoded answer as ``raw`` (read-only), so members added to the service
later are never lost. Builders are tolerant: a member the service did not send
is ``None`` (or empty), never an exception.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import MISSING, dataclass, field, fields
from pathlib import Path
from types import MappingProxyType
from typing import Any

from curvewise_client.errors import Problem

EMPTY: Mapping[str, Any] = MappingProxyType({})


def _empty() -> Mapping[str, Any]:
    return EMPTY


def freeze(value: Any) -> Any:
    """Deep read-only copy of decoded JSON (dict -> mapping proxy, list -> tuple)."""
    if isinstance(value, Mapping):
        return MappingProxyType({k: freeze(v) for k, v in value.items()})
    if isinstance(value, (list, tuple)):
        return tuple(freeze(v) for v in value)
    return value


def thaw(value: Any) -> Any:
    """Plain JSON-ready copy of a frozen value (mapping -> dict, tuple -> list)."""
    if isinstance(value, Mapping):
        return {k: thaw(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [thaw(v) for v in value]
    return value


@dataclass(frozen=True, slots=True)
class ModelInfo:
    """The fitted model: family, degree and term names in order."""

    family: str | None = None
    degree: int | None = None
    intercept: bool | None = None
    terms: tuple[str, ...] = ()
    transform_x: str | None = None
    transform_y: str | None = None


@dataclass(frozen=True, slots=True)
class Coefficient:
    """One coefficient in the raw x scale, with its confidence limits."""

    term: str
    estimate: float | None = None
    std_error: float | None = None
    t: float | None = None
    p_value: float | None = None
    lower: float | None = None
    upper: float | None = None


@dataclass(frozen=True, slots=True)
class AnovaRow:
    """One row of the sequential (Type I) table; the residual row has no ``f``/``p_value``."""

    term: str
    df: int | None = None
    sum_sq: float | None = None
    mean_sq: float | None = None
    f: float | None = None
    p_value: float | None = None


@dataclass(frozen=True, slots=True)
class Statistics:
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
    predicted_r_squared: float | None = None
    condition_number: float | None = None


@dataclass(frozen=True, slots=True)
class Candidate:
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


@dataclass(frozen=True, slots=True)
class Selection:
    """How the degree was chosen, with the candidate trail."""

    method: str | None = None
    chosen_degree: int | None = None
    candidates: tuple[Candidate, ...] = ()
    reason: str | None = None
    alpha: float | None = None


@dataclass(frozen=True, slots=True)
class Grid:
    """The fitted curve and its bands on the requested grid (aligned tuples)."""

    x: tuple[float, ...] = ()
    fit: tuple[float | None, ...] = ()
    mean_lower: tuple[float | None, ...] = ()
    mean_upper: tuple[float | None, ...] = ()
    obs_lower: tuple[float | None, ...] = ()
    obs_upper: tuple[float | None, ...] = ()
    se_fit: tuple[float | None, ...] = ()
    band_lower: tuple[float | None, ...] = ()
    band_upper: tuple[float | None, ...] = ()
    extrapolated: tuple[bool, ...] = ()
    level: float | None = None


@dataclass(frozen=True, slots=True)
class Notice:
    """A warning about the data or the numerics (``code`` is stable snake_case)."""

    code: str
    message: str = ""


@dataclass(frozen=True, slots=True)
class TrustFlag:
    """A plain-language reason to be careful with this fit, with the numbers behind it."""

    code: str
    severity: str | None = None
    message: str = ""
    evidence: Mapping[str, Any] = field(default_factory=_empty)


@dataclass(frozen=True, slots=True)
class TestResult:
    """A formal assumption test (e.g. ``shapiro_wilk``)."""

    name: str
    statistic: float | None = None
    p_value: float | None = None
    df: tuple[float, ...] | None = None
    note: str = ""


@dataclass(frozen=True, slots=True)
class Diagnostics:
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
    thresholds: Mapping[str, Any] = field(default_factory=_empty)


@dataclass(frozen=True, slots=True)
class FitResult:
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
    diagnostics: Diagnostics | None = None
    grid: Grid | None = None
    warnings: tuple[Notice, ...] = ()
    flags: tuple[TrustFlag, ...] = ()
    fitted_model: Mapping[str, Any] | None = None
    raw: Mapping[str, Any] = field(default_factory=_empty)

    @property
    def chosen_degree(self) -> int | None:
        """The degree that was fitted (chosen or fixed)."""
        if self.selection is not None and self.selection.chosen_degree is not None:
            return self.selection.chosen_degree
        return self.model.degree if self.model else None


@dataclass(frozen=True, slots=True)
class BatchItem:
    """One series of a batch: ``status`` ``"ok"`` with ``fit``, or ``"error"`` with ``error``."""

    id: Any = None
    status: str | None = None
    fit: Mapping[str, Any] | None = None
    error: Mapping[str, Any] | None = None
    line: int | None = None
    raw: Mapping[str, Any] = field(default_factory=_empty)

    @property
    def ok(self) -> bool:
        """True when this series was fitted."""
        return self.status == "ok"

    @property
    def problem(self) -> Problem | None:
        """This series' error as :class:`~curvewise_client.errors.Problem` (None when ok)."""
        if self.error is None:
            return None
        return Problem.from_json(self.error, int(self.error.get("status") or 422))

    def fit_result(self) -> FitResult | None:
        """The fit as a typed :class:`FitResult` (complete with ``detail="full"``)."""
        return None if self.fit is None else build(FitResult, self.fit)


@dataclass(frozen=True, slots=True)
class BatchResult:
    """The answer of ``POST /v1/batch`` (JSON form), results in request order."""

    results: tuple[BatchItem, ...] = ()
    summary: Mapping[str, Any] = field(default_factory=_empty)
    raw: Mapping[str, Any] = field(default_factory=_empty)


@dataclass(frozen=True, slots=True)
class PredictionRow:
    """Fitted value and bands at one new x."""

    x: float | None = None
    fit: float | None = None
    mean_lower: float | None = None
    mean_upper: float | None = None
    obs_lower: float | None = None
    obs_upper: float | None = None
    extrapolated: bool | None = None
    se_fit: float | None = None
    band_lower: float | None = None
    band_upper: float | None = None


@dataclass(frozen=True, slots=True)
class Predictions:
    """The answer of ``POST /v1/predict``."""

    predictions: tuple[PredictionRow, ...] = ()
    level: float | None = None
    replicates: int | None = None
    extrapolated_count: int | None = None
    raw: Mapping[str, Any] = field(default_factory=_empty)


@dataclass(frozen=True, slots=True)
class Estimate:
    """An x read back from one observed y (``status`` is ``"ok"`` or why not)."""

    y: float | None = None
    x: float | None = None
    lower: float | None = None
    upper: float | None = None
    status: str | None = None
    other_roots: tuple[float, ...] = ()
    replicates: int | None = None
    sensitivity: float | None = None

    @property
    def ok(self) -> bool:
        """True when exactly one x in the calibrated range answers this y."""
        return self.status == "ok"


@dataclass(frozen=True, slots=True)
class Estimates:
    """The answer of ``POST /v1/invert``."""

    estimates: tuple[Estimate, ...] = ()
    level: float | None = None
    monotone: bool | None = None
    turning_points: tuple[float, ...] = ()
    x_min: float | None = None
    x_max: float | None = None
    calibration: Mapping[str, Any] | None = None
    raw: Mapping[str, Any] = field(default_factory=_empty)


@dataclass(frozen=True, slots=True)
class Figure:
    """The answer of ``POST /v1/plot``: image bytes and their media type."""

    content_type: str
    data: bytes

    @property
    def format(self) -> str:
        """``"png"`` or ``"svg"``."""
        return "svg" if "svg" in self.content_type else "png"

    def save(self, path: str | Path) -> Path:
        """Write the image to ``path`` and return it."""
        target = Path(path)
        target.write_bytes(self.data)
        return target


@dataclass(frozen=True, slots=True)
class FamilyOption:
    """One model option of a family: name, JSON type, default, allowed values."""

    name: str
    type: str | None = None
    default: Any = None
    choices: tuple[Any, ...] | None = None
    description: str = ""


@dataclass(frozen=True, slots=True)
class Family:
    """A model family the service fits, with its options."""

    name: str
    description: str = ""
    options: tuple[FamilyOption, ...] = ()
    select_methods: tuple[str, ...] = ()
    transforms: tuple[str, ...] = ()


@dataclass(frozen=True, slots=True)
class Limits:
    """This server's limits (``None`` when not sent)."""

    max_body_bytes: int | None = None
    max_points: int | None = None
    max_degree: int | None = None
    max_grid_points: int | None = None
    max_series: int | None = None
    max_total_points: int | None = None
    request_timeout: float | None = None


@dataclass(frozen=True, slots=True)
class Families:
    """The answer of ``GET /v1/families``: families, vocabularies, defaults and limits."""

    families: tuple[Family, ...] = ()
    missing_policies: tuple[str, ...] = ()
    sections: tuple[str, ...] = ()
    defaults: Mapping[str, Any] = field(default_factory=_empty)
    limits: Limits | None = None
    raw: Mapping[str, Any] = field(default_factory=_empty)

    def __getitem__(self, name: str) -> Any:
        """The decoded member ``name`` as sent (``families["limits"]["max_degree"]``)."""
        return self.raw[name]


def _rows(builder: Callable[[Any], Any]) -> Callable[[Any], tuple]:
    """Rows from a list of objects, or from an object of equal-length columns."""
    def convert(values: Any) -> tuple:
        if isinstance(values, Mapping):
            names = list(values)
            values = [dict(zip(names, row, strict=True))
                      for row in zip(*(values[k] for k in names), strict=True)]
        return tuple(builder(v) for v in values)
    return convert


def _items(builder: Callable[[Any], Any]) -> Callable[[Any], tuple]:
    return lambda values: tuple(builder(v) for v in values)


def build(cls: type, data: Mapping[str, Any] | None) -> Any:
    """Build ``cls`` from decoded JSON: known members by name, nested types converted."""
    if data is None:
        return None
    if not isinstance(data, Mapping):
        raise TypeError(f"{cls.__name__}: expected a JSON object, got {type(data).__name__}")
    converters = _CONVERT.get(cls, {})
    kwargs: dict[str, Any] = {}
    for f in fields(cls):
        if f.name == "raw":
            kwargs["raw"] = freeze(data)
            continue
        if f.name not in data:
            if f.default is MISSING and f.default_factory is MISSING:
                kwargs[f.name] = None
            continue
        value = data[f.name]
        convert = converters.get(f.name)
        kwargs[f.name] = convert(value) if (convert and value is not None) else freeze(value)
    return cls(**kwargs)


def _of(cls: type) -> Callable[[Any], Any]:
    return lambda value: build(cls, value)


_CONVERT: dict[type, dict[str, Callable[[Any], Any]]] = {
    FitResult: {
        "model": _of(ModelInfo),
        "coefficients": _items(_of(Coefficient)),
        "anova": _items(_of(AnovaRow)),
        "statistics": _of(Statistics),
        "selection": _of(Selection),
        "grid": _of(Grid),
        "diagnostics": _of(Diagnostics),
        "warnings": _items(_of(Notice)),
        "flags": _items(_of(TrustFlag)),
    },
    Selection: {"candidates": _items(_of(Candidate))},
    Diagnostics: {"tests": _items(_of(TestResult))},
    BatchResult: {"results": _items(_of(BatchItem))},
    Predictions: {"predictions": _rows(_of(PredictionRow))},
    Estimates: {"estimates": _rows(_of(Estimate))},
    Families: {"families": _items(_of(Family)), "limits": _of(Limits)},
    Family: {"options": _items(_of(FamilyOption))},
}
