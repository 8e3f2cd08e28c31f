"""A validated nonlinear least-squares problem and guarded model evaluation.

A *model* is any object with ``parameter_names`` (tuple of str),
``values(x, theta) -> (n,)``, ``jacobian(x, theta) -> (n, p)`` and
``values_and_jacobian(x, theta)``. ``x`` is passed through untouched apart
from conversion to a read-only array whose first axis indexes the
observations (so a model may take ``(n,)`` or ``(n, k)`` predictors).

Model evaluations never raise out of the engine: NaN, inf, wrong shapes and
arithmetic exceptions all come back as ``None`` from :meth:`Problem.values`
and :meth:`Problem.values_and_jacobian`. Only the checks of the caller's own
input (:func:`make_problem`, :func:`check_start`) raise typed errors.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from service.core.errors import DataError, DesignError, SpecError
from service.core.nonlinear.results import frozen

MODEL_FAILURES = (ArithmeticError, ValueError, TypeError, IndexError)


@dataclass(frozen=True, slots=True)
class Problem:
    """The data, weights and bounds of one fit (validated, read-only)."""

    model: Any
    parameter_names: tuple[str, ...]
    x: np.ndarray
    y: np.ndarray
    weights: np.ndarray
    sqrt_weights: np.ndarray
    weighted: bool
    lower: np.ndarray
    upper: np.ndarray

    @property
    def n(self) -> int:
        return self.y.size

    @property
    def p(self) -> int:
        return len(self.parameter_names)

    @property
    def bounded(self) -> bool:
        return bool(np.isfinite(self.lower).any() or np.isfinite(self.upper).any())

    def values(self, theta: np.ndarray) -> np.ndarray | None:
        """Model values at ``theta``, or None when not finite / not computable."""
        try:
            with np.errstate(all="ignore"):
                f = np.asarray(self.model.values(self.x, theta), dtype=float)
        except MODEL_FAILURES:
            return None
        if f.shape != self.y.shape or not np.isfinite(f).all():
            return None
        return f

    def values_and_jacobian(self, theta: np.ndarray):
        """``(f, J)`` at ``theta``; either is None when not finite / not computable."""
        try:
            with np.errstate(all="ignore"):
                f, jac = self.model.values_and_jacobian(self.x, theta)
                f = np.asarray(f, dtype=float)
                jac = np.asarray(jac, dtype=float)
        except MODEL_FAILURES:
            return None, None
        good_f = f.shape == self.y.shape and bool(np.isfinite(f).all())
        good_j = jac.shape == (self.n, self.p) and bool(np.isfinite(jac).all())
        return (f if good_f else None), (jac if good_j else None)


def _vector(values, name: str, field: str, error=DataError) -> np.ndarray:
    try:
        arr = np.array(values, dtype=float)
    except (TypeError, ValueError) as exc:
        raise error(f"{name} must be numbers", field=field,
                    fix=f"send {name} as a list of numbers") from exc
    if arr.ndim != 1:
        raise error(f"{name} must be one-dimensional", field=field,
                    fix=f"send {name} as a flat list of numbers")
    return arr


def make_problem(model, x, y, *, weights=None, lower=None, upper=None) -> Problem:
    """Validate the data, weights and bounds; raise typed errors naming the field."""
    names = tuple(getattr(model, "parameter_names", ()))
    if not names or len(set(names)) != len(names) or not all(isinstance(s, str) for s in names):
        raise SpecError("The model needs at least one parameter, with distinct names.",
                        field="model.parameters", fix="Name every parameter once.")
    p = len(names)
    y_arr = _vector(y, "y", "y")
    n = y_arr.size
    if not np.isfinite(y_arr).all():
        bad = np.flatnonzero(~np.isfinite(y_arr))
        raise DataError(f"y has {bad.size} missing or infinite values (first at {bad[0]})",
                        field=f"y[{bad[0]}]", fix="drop or repair those points")
    try:
        x_arr = np.array(x, dtype=float)
    except (TypeError, ValueError) as exc:
        raise DataError("x must be numbers", field="x", fix="send x as numbers") from exc
    if x_arr.ndim == 0 or x_arr.shape[0] != n:
        raise DataError(f"x has {x_arr.shape[0] if x_arr.ndim else 0} rows but y has {n}",
                        field="x", fix="send one x (row) per y value")
    if not np.isfinite(x_arr).all():
        raise DataError("x has missing or infinite values", field="x",
                        fix="drop or repair those points")
    if n < p:
        raise DesignError(f"{n} points cannot determine {p} parameters", field="y",
                          fix=f"send at least {p} points or use a model with fewer parameters")
    if weights is None:
        w = np.ones(n)
    else:
        w = _vector(weights, "weights", "weights")
        if w.size != n:
            raise DataError(f"{w.size} weights for {n} points", field="weights",
                            fix="send one weight per point")
        bad = np.flatnonzero(~(np.isfinite(w) & (w > 0)))
        if bad.size:
            raise DataError(f"weights must be finite and positive (weights[{bad[0]}] is "
                            f"{w[bad[0]]})", field=f"weights[{bad[0]}]",
                            fix="use inverse variances > 0, or drop the point")
    lo = _bound(lower, p, -np.inf, "model.lower")
    hi = _bound(upper, p, np.inf, "model.upper")
    clash = np.flatnonzero(~(lo < hi))
    if clash.size:
        j = clash[0]
        raise SpecError(f"The lower bound of {names[j]} ({lo[j]}) is not below its upper "
                        f"bound ({hi[j]}).", field="model.lower",
                        fix=f"Give {names[j]} a lower bound below its upper bound.")
    with np.errstate(all="ignore"):
        sw = np.sqrt(w)
    x_arr.setflags(write=False)
    return Problem(model, names, x_arr, frozen(y_arr), frozen(w), frozen(sw),
                   weights is not None, frozen(lo), frozen(hi))


def _bound(values, p: int, default: float, field: str) -> np.ndarray:
    if values is None:
        return np.full(p, default)
    arr = _vector(values, "bounds", field, SpecError)
    if arr.size != p or np.isnan(arr).any():
        raise SpecError(f"{field} needs {p} numbers (use -inf/inf for none)", field=field,
                        fix="give one bound per parameter")
    return arr


def check_start(problem: Problem, start) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Validate start values; return ``(theta, f, J)`` evaluated there.

    Raises :class:`SpecError` with field ``"model.parameters"`` when the model
    or its Jacobian is not finite at the start (naming the parameters to
    change), ``"x[i]"`` when it is not finite at some points whatever single
    start value changes (``log(x)`` at ``x = 0``), or ``"model.lower"``/
    ``"model.upper"`` when a start value lies outside its bounds.
    """
    names = problem.parameter_names
    theta = _vector(start, "start values", "model.parameters", SpecError)
    if theta.size != problem.p or not np.isfinite(theta).all():
        raise SpecError(f"Need {problem.p} finite start values for {', '.join(names)}.",
                        field="model.parameters", fix="Give every parameter a finite start value.")
    for side, bound, outside in (("lower", problem.lower, theta < problem.lower),
                                 ("upper", problem.upper, theta > problem.upper)):
        if outside.any():
            j = int(np.flatnonzero(outside)[0])
            raise SpecError(f"The start value of {names[j]} ({theta[j]:.6g}) is outside its "
                            f"{side} bound ({bound[j]:.6g}).", field=f"model.{side}",
                            fix=f"Move the start value of {names[j]} inside its bounds.")
    f, jac = problem.values_and_jacobian(theta)
    shown = ", ".join(f"{s}={v:.6g}" for s, v in zip(names, theta, strict=True))
    if f is None:
        hint = _single_changes(problem, theta)
        if hint:
            raise SpecError(f"The model is not finite at the start values ({shown}) for some "
                            f"x; changing {hint} alone makes it finite.",
                            field="model.parameters", fix=f"Change the start value of {hint}.")
        bad = _undefined_points(problem, theta)
        if bad.size and bad.size < problem.n:
            i = int(bad[0])
            raise SpecError(f"The model is not finite at x[{i}] = {problem.x[i]:.6g} "
                            f"({bad.size} of {problem.n} points) at the start values ({shown}), "
                            "and no single start value changes that.", field=f"x[{i}]",
                            fix="Drop the points where the equation is undefined (e.g. a "
                                "zero dose under log(x)), or write the equation so it is "
                                "defined there.")
        raise SpecError(f"The model is not finite at the start values ({shown}) for some x.",
                        field="model.parameters",
                        fix="Change the start values so the model is finite at every x.")
    if jac is None:
        bad = _bad_columns(problem, theta)
        which = ", ".join(bad) if bad else ", ".join(names)
        raise SpecError(f"The model's derivatives with respect to {which} are not finite at "
                        f"the start values ({shown}).", field="model.parameters",
                        fix=f"Change the start value of {which}.")
    return theta, f, jac


def _single_changes(problem: Problem, theta: np.ndarray) -> str:
    """Which single start values, changed alone, make the model finite (with an example).

    Tries a few plain alternatives per parameter (its negative, half, double,
    1 and 0.1, inside the bounds); returns e.g. ``"rate (e.g. rate=1)"`` or "".
    """
    found = []
    for j, name in enumerate(problem.parameter_names):
        for value in (-theta[j], 0.5 * theta[j], 2.0 * theta[j], 1.0, 0.1):
            if value == theta[j] or not problem.lower[j] <= value <= problem.upper[j]:
                continue
            trial = theta.copy()
            trial[j] = value
            f, jac = problem.values_and_jacobian(trial)
            if f is not None and jac is not None:
                found.append(f"{name} (e.g. {name}={value:.6g})")
                break
    return " or ".join(found)


def _undefined_points(problem: Problem, theta: np.ndarray) -> np.ndarray:
    """Positions where the model is not finite at ``theta`` (empty when it cannot tell)."""
    try:
        with np.errstate(all="ignore"):
            f = np.asarray(problem.model.values(problem.x, theta), dtype=float)
    except MODEL_FAILURES:
        return np.empty(0, dtype=int)
    if f.shape != problem.y.shape:
        return np.empty(0, dtype=int)
    return np.flatnonzero(~np.isfinite(f))


def _bad_columns(problem: Problem, theta: np.ndarray) -> list[str]:
    try:
        with np.errstate(all="ignore"):
            jac = np.asarray(problem.model.jacobian(problem.x, theta), dtype=float)
    except MODEL_FAILURES:
        return []
    if jac.shape != (problem.n, problem.p):
        return []
    bad = ~np.isfinite(jac).all(axis=0)
    return [s for s, b in zip(problem.parameter_names, bad, strict=True) if b]
