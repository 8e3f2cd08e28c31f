"""Request bodies: JSON that keeps every digit, missing values as null, arrays from anything
list-like (lists, tuples, numpy arrays, pandas Series of any numeric or nullable dtype).

Missing values -- ``None``, NaN, ``pd.NA``, ``pd.NaT``, ``numpy.datetime64("NaT")`` -- are
sent as JSON ``null`` (the service refuses them unless ``missing="drop"``); numpy scalars
become plain numbers; infinity and values that cannot be numbers on the wire are refused with
:class:`~curvewise_client.errors.InputError` before anything is sent.
"""

from __future__ import annotations

import json
import math
from collections.abc import Mapping, Sequence
from decimal import Decimal
from numbers import Real
from typing import Any

from curvewise_client.errors import InputError
from curvewise_client.results import FitResult, thaw

_MISSING_TYPES = {"NAType", "NaTType"}  # pandas.NA and pandas.NaT, recognised without pandas


def fit_body(x: Any, y: Any, *, weights: Any = None, model: Mapping[str, Any] | None = None,
             degree: int | None = None, max_degree: int | None = None,
             select: str | None = None, grid: Mapping[str, Any] | None = None,
             level: float | None = None, missing: str | None = None,
             weighting: str | None = None, include: Sequence[str] | None = None
             ) -> dict[str, Any]:
    """The ``/v1/fit`` request body as a dict (shortcuts merged into ``model``)."""
    spec = open_bounds(mapping(model, "model", "{'degree': 2}") or {}, "model")
    spec.update(drop_none(degree=degree, max_degree=max_degree, select=select))
    body: dict[str, Any] = {"x": numbers(x, "x"), "y": numbers(y, "y")}
    if weights is not None:
        body["weights"] = numbers(weights, "weights")
    body.update(drop_none(model=spec or None, grid=mapping(grid, "grid", "{'count': 200}") or None,
                          level=level,
                          missing=missing, weighting=weighting,
                          include=strings(include, "include")))
    return body


def encode(payload: Any) -> bytes:
    """Compact JSON; floats keep every digit; NaN becomes null; infinity is refused."""
    try:
        return json.dumps(payload, allow_nan=False, separators=(",", ":"),
                          default=_default).encode()
    except InputError:
        raise
    except ValueError:  # NaN or infinity somewhere: find it, name it, or send null for NaN
        return json.dumps(_nan_to_none(payload), allow_nan=False, separators=(",", ":"),
                          default=_default).encode()


def _nan_to_none(value: Any, path: str = "") -> Any:
    if isinstance(value, float) and not math.isfinite(value):
        if math.isnan(value):
            return None
        data = path.split(".")[-1].split("[")[0] in _SERIES_ARRAYS
        raise InputError(f"{path or 'value'} is infinite; JSON has no infinity — send a finite "
                         "number" + (" or drop the point" if data else ""))
    if isinstance(value, Mapping):
        return {k: _nan_to_none(v, f"{path}.{k}" if path else str(k)) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_nan_to_none(v, f"{path}[{i}]") for i, v in enumerate(value)]
    if hasattr(value, "tolist"):
        return _nan_to_none(value.tolist(), path)
    return value


def _default(obj: Any) -> Any:
    if isinstance(obj, Mapping):
        return dict(obj)
    if type(obj).__name__ in _MISSING_TYPES:
        return None
    if hasattr(obj, "tolist"):  # numpy arrays/scalars, pandas Series, without importing them
        return _plain_list(obj.tolist()) if hasattr(obj, "__len__") else obj.tolist()
    if isinstance(obj, (Decimal, Real)):
        return float(obj)
    raise InputError(f"cannot send a {type(obj).__name__} as JSON: send numbers, strings, "
                     "lists or mappings")


def _plain_list(values: Any) -> Any:
    if isinstance(values, list):
        return [None if type(v).__name__ in _MISSING_TYPES else v for v in values]
    return values


def numbers(values: Any, name: str = "value") -> list[Any]:
    """A JSON-ready list from a list, tuple, numpy array or pandas Series (any numeric dtype).

    Missing values become ``None``, numpy scalars plain numbers; other elements are sent
    as they are, so the service can name the offending index (``y[17]``).
    """
    if values is None or isinstance(values, (str, bytes, Mapping)) or (
            getattr(values, "ndim", 1) != 1):
        shape = getattr(values, "shape", None)
        what = f"an array of shape {shape}" if shape is not None else type(values).__name__
        raise InputError(f"{name} must be a one-dimensional sequence of numbers "
                         f"(list, tuple, numpy array or pandas Series), not {what}")
    if hasattr(values, "tolist"):
        values = values.tolist()
    try:
        items = list(values)
    except TypeError:
        raise InputError(f"{name} must be a sequence of numbers (list, tuple, numpy array or "
                         f"pandas Series), not a {type(values).__name__}") from None
    if all(type(v) is float or type(v) is int for v in items):
        return items  # the common case: plain numbers (NaN is turned into null when encoding)
    return [_number(v) for v in items]


def _number(value: Any) -> Any:
    """One element: missing -> None, numpy/pandas scalars -> plain numbers, others unchanged."""
    if value is None or type(value) is float or type(value) is int:
        return value
    if type(value).__name__ in _MISSING_TYPES:
        return None
    if isinstance(value, bool):
        return value  # sent as is: the service names it as not a number
    if hasattr(value, "item") and not isinstance(value, (list, tuple)):
        value = value.item()  # numpy scalar (np.float32, np.int64, datetime64('NaT') -> None)
        if value is None or type(value) is float or type(value) is int or isinstance(
                value, bool):
            return value
    if isinstance(value, float):
        return float(value)
    if isinstance(value, int) and not isinstance(value, bool):
        return int(value)
    if isinstance(value, (Decimal, Real)):
        return float(value)
    return value


def strings(values: Any, name: str) -> list[str] | None:
    """A list of names (``include``, ``panels``): a single string is refused, not split."""
    if values is None:
        return None
    if isinstance(values, str):
        raise InputError(f"{name} must be a list of names, e.g. [{values!r}], not one string")
    try:
        return list(values.tolist() if hasattr(values, "tolist") else values)
    except TypeError:
        raise InputError(f"{name} must be a list of names, not a {type(values).__name__}"
                         ) from None


def mapping(value: Any, name: str, example: str) -> dict[str, Any] | None:
    """A request member that is a JSON object (``model``, ``grid``), as a new dict."""
    if value is None:
        return None
    if not isinstance(value, Mapping):
        raise InputError(f"{name} must be a mapping such as {example}, "
                         f"not a {type(value).__name__}")
    return dict(value)


def open_bounds(spec: dict[str, Any], name: str) -> dict[str, Any]:
    """``spec`` with bounds of -inf (lower) and +inf (upper) left out: "no bound", as in
    scipy's ``bounds=(-inf, inf)``; JSON has no infinity and the service reads an absent
    bound as none. Also inside ``candidates``. An infinity on the wrong side is refused."""
    out = dict(spec)
    for side, none in (("lower", -math.inf), ("upper", math.inf)):
        bounds = out.get(side)
        if not isinstance(bounds, Mapping):
            continue
        kept = {}
        for key, value in bounds.items():
            if isinstance(value, Real) and not isinstance(value, bool) and math.isinf(value):
                if value != none:
                    raise InputError(f"{name}.{side}.{key} is {float(value)}: a {side} bound "
                                     f"must be finite, or {none} for none (then left out)")
                continue
            kept[key] = value
        if kept:
            out[side] = kept
        else:
            out.pop(side)
    candidates = out.get("candidates")
    if isinstance(candidates, (list, tuple)):
        out["candidates"] = [open_bounds(dict(c), f"{name}.candidates[{i}]")
                             if isinstance(c, Mapping) else c for i, c in enumerate(candidates)]
    return out


def drop_none(**members: Any) -> dict[str, Any]:
    return {k: v for k, v in members.items() if v is not None}


_SERIES_ARRAYS = ("x", "y", "weights")


def series_body(item: Any, position: int | None = None) -> dict[str, Any]:
    """One series object of a batch; arrays as for :func:`numbers`."""
    where = "series" if position is None else f"series[{position}]"
    if not isinstance(item, Mapping):
        raise InputError(f"{where} must be a mapping such as {{'id': 'a', 'x': [...], "
                         f"'y': [...]}}, not a {type(item).__name__}")
    out = {k: v for k, v in item.items() if v is not None}
    if isinstance(out.get("model"), Mapping):
        out["model"] = open_bounds(dict(out["model"]), f"{where}.model")
    for key in _SERIES_ARRAYS:
        if key in out:
            out[key] = numbers(out[key], f"{where}.{key}")
    return out


def document(fitted_model: Mapping[str, Any] | FitResult) -> dict[str, Any]:
    """The fitted-model document to send: from a :class:`FitResult` or a stored mapping."""
    if isinstance(fitted_model, FitResult):
        if fitted_model.fitted_model is None:
            raise InputError("this fit result carries no fitted_model (was it left out of "
                             "include?)")
        fitted_model = fitted_model.fitted_model
    if not isinstance(fitted_model, Mapping):
        raise InputError("fitted_model must be the fitted_model mapping of a /v1/fit answer "
                         f"(or the FitResult), not a {type(fitted_model).__name__}")
    return thaw(fitted_model)


def iterable_series(series: Any) -> Any:
    """``series`` of a batch, checked to be a list or an iterator (not one mapping)."""
    if isinstance(series, (str, bytes, Mapping)) or not hasattr(series, "__iter__"):
        raise InputError("series must be a list (or an iterator) of series mappings such as "
                         f"{{'id': 'a', 'x': [...], 'y': [...]}}, not a {type(series).__name__}")
    return series


def shared_members(*, model: Mapping[str, Any] | None, include: Sequence[str] | None,
                   grid: Mapping[str, Any] | None, **members: Any) -> dict[str, Any]:
    """The shared members of a batch request, None left out."""
    spec = mapping(model, "model", "{'max_degree': 3}")
    return drop_none(model=open_bounds(spec, "model") if spec else None,
                     include=strings(include, "include"),
                     grid=mapping(grid, "grid", "{'count': 200}") or None, **members)
