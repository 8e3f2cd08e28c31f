"""Results of ``POST /v1/predict`` and ``POST /v1/invert`` (rows, or columns turned into rows)."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

from curvewise_client.results.base import empty_mapping, of, register, rows
from curvewise_client.results.fit import Notice
from curvewise_client.results.plain import Result


@dataclass(frozen=True, slots=True, repr=False)
class PredictionRow(Result):
    """Fitted value and bands at one new x."""

    x: float | None = None
    fit: float | None = None
    mean_lower: float | None = None
    mean_upper: float | None = None
    obs_lower: float | None = None
    obs_upper: float | None = None
    extrapolated: bool | None = None
    se_mean: float | None = None
    band_lower: float | None = None
    band_upper: float | None = None
    unbounded: bool | None = None


@dataclass(frozen=True, slots=True, repr=False)
class Predictions(Result):
    """The answer of ``POST /v1/predict``."""

    predictions: tuple[PredictionRow, ...] = ()
    level: float | None = None
    replicates: int | None = None
    extrapolated_count: int | None = None
    undefined_count: int | None = None
    intervals_withheld: Notice | None = None  # an exact fit (sigma = 0): limits are None
    raw: Mapping[str, Any] = field(default_factory=empty_mapping)


@dataclass(frozen=True, slots=True, repr=False)
class Estimate(Result):
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
class WorkingRange:
    """The x range where the CV of a back-calculated x stays at or under ``cv_limit``
    (logistic4/logistic5 calibrations; a computed guide, not a validated limit)."""

    cv_limit: float | None = None
    replicates: int | None = None
    lower: float | None = None
    upper: float | None = None


@dataclass(frozen=True, slots=True, repr=False)
class Estimates(Result):
    """The answer of ``POST /v1/invert``."""

    estimates: tuple[Estimate, ...] = ()
    level: float | None = None
    monotone: bool | None = None
    turning_points: tuple[float, ...] = ()
    x_min: float | None = None
    x_max: float | None = None
    calibration: Mapping[str, Any] | None = None
    working_range: WorkingRange | None = None
    raw: Mapping[str, Any] = field(default_factory=empty_mapping)



register(Predictions, predictions=rows(of(PredictionRow)), intervals_withheld=of(Notice))
register(Estimates, estimates=rows(of(Estimate)), working_range=of(WorkingRange))
