"""Every member the service documents in its answers has a typed attribute on the client's
result (nothing reachable only through ``raw``), and a nonlinear fit's derived quantities
and start trail come through with their values.

Oracle: the response schemas the service publishes in /openapi.json (schemas/), walked
member by member; the half-life against ln 2 / k of the same answer (its definition).
"""

from __future__ import annotations

import dataclasses
import math
import typing

import numpy as np
import pytest
from curvewise_client import (
    BatchResult,
    DerivedQuantity,
    Estimates,
    Families,
    FitResult,
    Predictions,
)
from marshmallow import fields

from schemas.batch_summary import BatchResponseSchema
from schemas.families import FamiliesResponseSchema
from schemas.fit_response import FitResponseSchema
from schemas.models import InvertResponseSchema, PredictResponseSchema

ANSWERS = [(FitResponseSchema, FitResult), (PredictResponseSchema, Predictions),
           (InvertResponseSchema, Estimates), (FamiliesResponseSchema, Families),
           (BatchResponseSchema, BatchResult)]


def _nested_schema(field):
    inner = field.inner if isinstance(field, fields.List) else field
    return type(inner.schema) if isinstance(inner, fields.Nested) else None


def _result_class(annotation):
    """The result dataclass inside ``X | None`` or ``tuple[X, ...]`` (None for a mapping)."""
    stack = [annotation]
    while stack:
        current = stack.pop()
        if dataclasses.is_dataclass(current):
            return current
        stack.extend(typing.get_args(current))
    return None


def _missing(schema, cls, path: str) -> list[str]:
    hints = typing.get_type_hints(cls)
    out = []
    for name, field in schema().fields.items():
        if name not in hints:
            out.append(f"{path}.{name}")
            continue
        inner, result = _nested_schema(field), _result_class(hints[name])
        if inner is not None and result is not None:
            out += _missing(inner, result, f"{path}.{name}")
    return out


@pytest.mark.parametrize(("schema", "cls"), ANSWERS, ids=lambda v: getattr(v, "__name__", v))
def test_every_documented_member_has_a_typed_attribute(schema, cls):
    assert _missing(schema, cls, cls.__name__) == []


def test_derived_quantities_and_the_start_trail_are_typed(inprocess_client):
    rng = np.random.default_rng(7)  # seeded demo data: first-order decay to a plateau
    t = np.linspace(0.0, 48.0, 13)
    y = 5.0 + 95.0 * np.exp(-0.08 * t) + rng.normal(0.0, 1.5, t.size)
    fit = inprocess_client.fit(t, y, model={"family": "exponential"})
    (half_life,) = fit.derived
    assert isinstance(half_life, DerivedQuantity) and half_life.name == "half_life"
    k = next(c for c in fit.coefficients if c.term == "k")
    assert half_life.parameter == "k"
    assert half_life.estimate == pytest.approx(math.log(2.0) / k.estimate, rel=1e-12)
    assert half_life.profile_lower == pytest.approx(math.log(2.0) / k.profile_upper, rel=1e-12)
    assert fit.fit_info.start_strategy == fit.raw["fit_info"]["start_strategy"]
    assert fit.fit_info.starts_tried >= 1
    assert FitResult.from_dict(fit.to_dict()).derived == fit.derived
