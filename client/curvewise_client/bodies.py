"""Request bodies: JSON that keeps every digit, NaN as null, arrays from anything list-like."""

from __future__ import annotations

import json
import math
from collections.abc import Mapping, Sequence
from typing import Any

from curvewise_client.results import FitResult, thaw


def fit_body(x: Sequence[float], y: Sequence[float], *, weights: Sequence[float] | None = None,
             model: Mapping[str, Any] | None = None, degree: int | None = None,
             max_degree: int | None = None, select: str | None = None,
             grid: Mapping[str, Any] | None = None, level: float | None = None,
             **options: Any) -> dict[str, Any]:
    """The ``/v1/fit`` request body as a dict (shortcuts merged into ``model``)."""
    spec = dict(model or {})
    spec.update(drop_none(degree=degree, max_degree=max_degree, select=select))
    body: dict[str, Any] = {"x": numbers(x), "y": numbers(y)}
    if weights is not None:
        body["weights"] = numbers(weights)
    body.update(drop_none(model=spec or None, grid=dict(grid) if grid else None, level=level,
                           **options))
    return body


def encode(payload: Any) -> bytes:
    """Compact JSON; floats keep every digit; NaN becomes null; infinity is refused."""
    try:
        return json.dumps(payload, allow_nan=False, separators=(",", ":"),
                          default=_default).encode()
    except ValueError:
        return json.dumps(_nan_to_none(payload), allow_nan=False, separators=(",", ":"),
                          default=_default).encode()


def _nan_to_none(value: Any, path: str = "") -> Any:
    if isinstance(value, float) and not math.isfinite(value):
        if math.isnan(value):
            return None
        raise ValueError(f"{path or 'value'} is infinite; JSON has no infinity — send a finite "
                         "number or drop the point")
    if isinstance(value, Mapping):
        return {k: _nan_to_none(v, f"{path}.{k}" if path else str(k)) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_nan_to_none(v, f"{path}[{i}]") for i, v in enumerate(value)]
    return value


def _default(obj: Any) -> Any:
    if isinstance(obj, Mapping):
        return dict(obj)
    if hasattr(obj, "tolist"):  # numpy arrays/scalars, pandas Series, without importing them
        return obj.tolist()
    raise TypeError(f"cannot send a {type(obj).__name__} as JSON")


def numbers(values: Any) -> Any:
    if hasattr(values, "tolist"):
        return values.tolist()
    return list(values)


def drop_none(**members: Any) -> dict[str, Any]:
    return {k: v for k, v in members.items() if v is not None}


def series_body(item: Mapping[str, Any]) -> dict[str, Any]:
    out = {k: v for k, v in dict(item).items() if v is not None}
    for key in ("x", "y", "weights"):
        if key in out:
            out[key] = numbers(out[key])
    return out


def document(fitted_model: Mapping[str, Any] | FitResult) -> dict[str, Any]:
    if isinstance(fitted_model, FitResult):
        if fitted_model.fitted_model is None:
            raise ValueError("this fit result carries no fitted_model (was it excluded?)")
        fitted_model = fitted_model.fitted_model
    return thaw(fitted_model)
