"""Where to evaluate the curve: the x values of a :class:`GridSpec`."""

from __future__ import annotations

import math

import numpy as np

from service.core.data import transforms
from service.core.errors import SpecError, TransformError
from service.core.spec import GridSpec

DEFAULT_COUNT = 200


def grid_points(spec: GridSpec, x_min: float, x_max: float, max_points: int) -> np.ndarray:
    """Return the grid's x values (original x scale).

    Forms, first match wins: explicit ``x``; ``start``/``stop``/``step``;
    ``start``/``stop`` with ``count`` points; ``count`` points over the data
    range ``[x_min, x_max]`` (default 200). A ``step`` grid includes ``stop``
    when it falls on the step (within rounding).

    Raises
    ------
    SpecError
        Non-finite or inconsistent limits, a non-positive count or step, or
        more than ``max_points`` points.
    """
    if spec.x is not None:
        xs = np.array(spec.x, dtype=float)  # a copy: the prediction freezes it
        if xs.ndim != 1 or not np.all(np.isfinite(xs)):
            raise SpecError("grid.x must be a flat list of finite numbers.", field="grid.x",
                            fix="Remove null, NaN or infinite values from grid.x.")
        _check_size(xs.size, max_points, "grid.x")
        return xs
    start = x_min if spec.start is None else float(spec.start)
    stop = x_max if spec.stop is None else float(spec.stop)
    for name, value in (("start", start), ("stop", stop)):
        if not math.isfinite(value):
            raise SpecError(f"grid.{name} must be a finite number.", field=f"grid.{name}",
                            fix=f"Give a finite grid.{name}, or omit it to use the data range.")
    if stop < start:
        raise SpecError(f"grid.stop ({stop:g}) is below grid.start ({start:g}).",
                        field="grid.stop", fix="Give stop >= start.")
    if not math.isfinite(stop - start):
        raise SpecError(f"The grid from {start:g} to {stop:g} spans more than the largest "
                        "double: its points cannot be spaced evenly.", field="grid.stop",
                        fix="Give grid.start and grid.stop less than 1.7e308 apart, or list "
                            "the points in grid.x.")
    if spec.step is not None:
        step = float(spec.step)
        if not (math.isfinite(step) and step > 0):
            raise SpecError("grid.step must be a positive number.", field="grid.step",
                            fix="Give a positive step, or use grid.count instead.")
        span = (stop - start) / step
        if span + 1 > max_points:
            _check_size(math.floor(span) + 1, max_points, "grid.step")
        count = int(math.floor(span * (1 + 1e-12) + 1e-9)) + 1
        xs = start + step * np.arange(count)
        if count > 1 and abs(span - (count - 1)) <= 1e-9 * max(span, 1.0):
            xs[-1] = stop   # stop falls on the step: exactly stop, never a rounding past it
        return xs
    count = DEFAULT_COUNT if spec.count is None else spec.count
    if isinstance(count, bool) or int(count) != count or count < 1:
        raise SpecError(f"grid.count = {count!r} is not a positive whole number.",
                        field="grid.count", fix="Give a count of 1 or more.")
    _check_size(int(count), max_points, "grid.count")
    if count == 1:
        return np.array([start])
    xs = start + (stop - start) / (count - 1) * np.arange(count)
    xs[-1] = stop
    return xs


def _check_size(size: int, max_points: int, field: str) -> None:
    if size > max_points:
        raise SpecError(f"The grid would have {size} points, over the limit of {max_points}.",
                        field=field, fix=f"Ask for at most {max_points} grid points (a larger "
                        "step or a smaller count), or predict in several requests.")


def check_domain(spec: GridSpec, xs: np.ndarray, transform: str) -> None:
    """Refuse grid points outside the domain of the x transform, naming the grid's field.

    ``xs`` are :func:`grid_points` of ``spec``. The field is ``grid.x[i]`` for an explicit
    grid, ``grid.start`` or ``grid.stop`` when an end is outside, else ``grid``.

    Raises
    ------
    TransformError
    """
    bad = transforms.first_outside(transform, xs)
    if bad is None:
        return
    raise TransformError(
        f"Grid point {bad} (x = {float(xs[bad])!r}) is outside the domain of the {transform} "
        f"transform of x (values must be {transforms.domain_words(transform)}).",
        field=grid_field(spec, xs, bad),
        fix="Give grid points inside that domain (grid.x, or grid.start and grid.stop on one "
            "side of it), or omit the grid to use the data range.")


def grid_field(spec: GridSpec, xs: np.ndarray, bad: int) -> str:
    """The field to name for grid point ``bad`` of ``xs`` (:func:`grid_points` of ``spec``):
    ``grid.x[i]`` for an explicit grid, ``grid.start`` or ``grid.stop`` for an end, else
    ``grid``."""
    if spec.x is not None:
        return f"grid.x[{bad}]"
    if bad == 0:
        return "grid.start"
    if bad == xs.size - 1:
        return "grid.stop"
    return "grid"
