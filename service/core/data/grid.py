"""Where to evaluate the curve: the x values of a :class:`GridSpec`.

A ``count`` grid is evenly spaced on x (``spacing`` "linear") or on log x ("log":
equal ratios between neighbours). Unless the caller chooses, a curve on log x
(a built-in dose-response family with ``model.scale`` "log") gets a log-spaced grid
over the data range, so the low doses, where such a curve bends, are not left with a
handful of its points. A zero-dose blank (x = 0) has no place on a log scale, but the
curve is defined there: such a grid spans the smallest positive x to the largest, and
x = 0 is its own first point (``count`` points in all). Other curves keep the even
grid; they get a log grid only when asked, and only over x > 0.
"""

from __future__ import annotations

import math

import numpy as np

from service.core.data import transforms
from service.core.errors import SpecError, TransformError
from service.core.spec import GRID_SPACINGS, GridSpec

DEFAULT_COUNT = 200


def resolved_spacing(spec: GridSpec, log_x: bool = False) -> str:
    """The spacing of ``spec``'s grid: the caller's, else ``"log"`` for a count over the data
    range of a curve on log x (``log_x``), else ``"linear"``."""
    if spec.spacing is not None:
        return spec.spacing
    data_range = spec.x is None and spec.step is None and spec.start is None
    return "log" if log_x and data_range else "linear"


def grid_points(spec: GridSpec, x_min: float, x_max: float, max_points: int, *,
                log_x: bool = False, x_positive: float | None = None) -> np.ndarray:
    """Return the grid's x values (original x scale).

    Forms, first match wins: explicit ``x``; ``start``/``stop``/``step``;
    ``start``/``stop`` with ``count`` points; ``count`` points over the data
    range ``[x_min, x_max]`` (default 200), spaced by :func:`resolved_spacing`.
    A ``step`` grid includes ``stop`` when it falls on the step (within rounding).

    Parameters
    ----------
    spec : GridSpec
        The caller's grid.
    x_min, x_max : float
        The data range.
    max_points : int
        The most points allowed.
    log_x : bool
        The curve is on log x: its grid is log-spaced unless the caller chose, and a data
        range from x = 0 (a blank) is log-spaced from ``x_positive`` with x = 0 first.
    x_positive : float or None
        The smallest positive data x (for a data range from x = 0).

    Raises
    ------
    SpecError
        Non-finite or inconsistent limits, a non-positive count or step, more than
        ``max_points`` points, or a log spacing over x <= 0 (naming ``grid.spacing``).
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
    spacing = resolved_spacing(spec, log_x)
    if spacing not in GRID_SPACINGS:
        raise SpecError(f"grid.spacing {spacing!r} is not one of {', '.join(GRID_SPACINGS)}.",
                        field="grid.spacing", fix="Use linear or log.")
    if spec.step is not None:
        if spacing == "log":
            raise SpecError("A step spaces the grid evenly; it cannot be log-spaced.",
                            field="grid.spacing", fix="Give grid.count instead of grid.step, "
                            "or leave grid.spacing out.")
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
    if spacing == "log":
        return _log_points(start, stop, int(count), blank=log_x and spec.start is None,
                           x_positive=x_positive)
    if count == 1:
        return np.array([start])
    xs = start + (stop - start) / (count - 1) * np.arange(count)
    xs[-1] = stop
    return xs


def fit_grid(options, xs: np.ndarray, log_x: bool = False) -> np.ndarray:
    """:func:`grid_points` of a fit's ``options.grid`` (a :class:`FitOptions`' grid, not
    None) over the range of its data ``xs`` (``log_x``: the curve is on log x)."""
    positive = xs[xs > 0]
    return grid_points(options.grid, float(xs.min()), float(xs.max()), options.max_grid_points,
                       log_x=log_x, x_positive=float(positive.min()) if positive.size else None)


def _log_points(start: float, stop: float, count: int, *, blank: bool,
                x_positive: float | None) -> np.ndarray:
    """``count`` points with equal ratios from ``start`` to ``stop`` (both exact); from a
    blank at x = 0 (``blank``: a curve on log x over its data range), x = 0 first and the
    rest from the smallest positive x."""
    if start > 0:
        return _geometric(start, stop, count)
    if blank and start == 0 and x_positive is not None and 0 < x_positive <= stop:
        if count == 1:
            return np.array([0.0])
        return np.concatenate(([0.0], _geometric(x_positive, stop, count - 1)))
    raise SpecError(f"A log-spaced grid needs x > 0 over its range, but the grid starts at "
                    f"{start:g}.", field="grid.spacing",
                    fix='Use grid.spacing "linear", or give grid.start and grid.stop above 0 '
                        "(a log-spaced grid from a zero-dose blank is made only for a curve "
                        "on log x over its data range).")


def _geometric(start: float, stop: float, count: int) -> np.ndarray:
    xs = np.geomspace(start, stop, count)
    xs[0], xs[-1] = start, stop
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
