"""Results of ``POST /v1/batch``: one item per series, in request order."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

from curvewise_client.errors import Problem
from curvewise_client.results.base import build, empty_mapping, items, of, register
from curvewise_client.results.fit import FitResult
from curvewise_client.results.plain import Result


@dataclass(frozen=True, slots=True, repr=False)
class BatchItem(Result):
    """One series of a batch: ``status`` ``"ok"`` with ``fit``, or ``"error"`` with ``error``."""

    id: Any = None
    status: str | None = None
    fit: Mapping[str, Any] | None = None
    error: Mapping[str, Any] | None = None
    line: int | None = None
    raw: Mapping[str, Any] = field(default_factory=empty_mapping)

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


@dataclass(frozen=True, slots=True, repr=False)
class BatchResult(Result):
    """The answer of ``POST /v1/batch`` (JSON form), results in request order."""

    results: tuple[BatchItem, ...] = ()
    summary: Mapping[str, Any] = field(default_factory=empty_mapping)
    raw: Mapping[str, Any] = field(default_factory=empty_mapping)



register(BatchResult, results=items(of(BatchItem)))
