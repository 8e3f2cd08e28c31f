"""Automatic start values of a built-in family: data shape, then a variable-projection grid.

Method (separable least squares, Golub & Pereyra 1973, "variable projection"):
for fixed values of the nonlinear parameters the model is linear in the others,
so their best values come from one weighted linear least-squares fit and the
residual sum of squares becomes a function of the nonlinear parameters alone.
That function is evaluated on a coarse grid (each family spans its grid from
the data: the x range for midpoints, rates relative to the x span); the grid's
best point and its other local minima (several starts where the surface is
multimodal) become start vectors, together with a start read from the data's
shape (asymptotes from the extremes, midpoints by interpolation, rates from
linearizations). The caller's fixed values, start values and bounds override.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from typing import NamedTuple

import numpy as np
from scipy import ndimage

from service.core.nonlinear.builtin.definition import Builtin, Series

MAX_GRID_CELLS = 400_000  # grid points x data points per vectorized block
RANK_RTOL = 1e-10         # a column this small against its norm makes the grid point singular


class Start(NamedTuple):
    """One start vector: the strategy that produced it and a value for every parameter."""

    strategy: str
    values: dict[str, float]


@dataclass(frozen=True, slots=True)
class Held:
    """What the caller holds: fixed values, given start values and bounds, by name."""

    fixed: Mapping[str, float]
    given: Mapping[str, float]
    lower: Mapping[str, float]
    upper: Mapping[str, float]

    def clip(self, name: str, value: float) -> float:
        """``value`` inside the caller's bounds of ``name`` (if any)."""
        lo, hi = self.lower.get(name, -np.inf), self.upper.get(name, np.inf)
        return float(min(max(value, lo), hi))


def conditional_linear(family: Builtin, series: Series, nonlinear: Mapping[str, np.ndarray],
                       fixed: Mapping[str, float]) -> tuple[np.ndarray, np.ndarray]:
    """Best free linear parameters and the residual sum of squares at each grid point.

    Parameters
    ----------
    family : Builtin
    series : Series
    nonlinear : mapping of str to ndarray, shape (G,)
        Values of every nonlinear parameter at G grid points.
    fixed : mapping of str to float
        Linear parameters held at a value (their term moves to the response side).

    Returns
    -------
    coef : ndarray, shape (G, m)
        The free linear parameters (:attr:`Builtin.linear` order, fixed ones left out).
    rss : ndarray, shape (G,)
        Weighted residual sum of squares; ``inf`` where the model is not finite
        or the linear design is singular.
    """
    size = next(iter(nonlinear.values())).size if nonlinear else 1
    n = series.y.size
    block = max(1, MAX_GRID_CELLS // max(n, 1))
    free = [name for name in family.linear if name not in fixed]
    coef, rss = np.full((size, len(free)), np.nan), np.full(size, np.inf)
    with np.errstate(all="ignore"):
        for lo in range(0, size, block):
            part = {k: np.asarray(v, float)[lo:lo + block, None] for k, v in nonlinear.items()}
            coef[lo:lo + block], rss[lo:lo + block] = _project(family, series, part, fixed,
                                                              free)
    return coef, rss


def _project(family, series, part, fixed, free):
    columns = dict(zip(family.linear, family.basis(series, part), strict=True))
    rows = next(iter(part.values())).shape[0] if part else 1
    target = np.broadcast_to(series.y, (rows, series.y.size)).copy()
    for name, value in fixed.items():
        if name in columns:
            target -= value * columns[name]
    b = series.sqrt_w * target
    if not free:
        rss = np.einsum("gn,gn->g", b, b)
        return np.empty((rows, 0)), np.where(np.isfinite(rss), rss, np.inf)
    a = np.stack([np.broadcast_to(columns[name], b.shape) for name in free], axis=2)
    a = a * series.sqrt_w[None, :, None]
    ok = np.isfinite(a).all(axis=(1, 2)) & np.isfinite(b).all(axis=1)
    a, b = np.where(ok[:, None, None], a, 0.0), np.where(ok[:, None], b, 0.0)
    q, r = np.linalg.qr(a)
    diag = np.abs(np.diagonal(r, axis1=1, axis2=2))
    norms = np.sqrt(np.einsum("gnm,gnm->gm", a, a))
    ok &= (diag > RANK_RTOL * norms).all(axis=1) & (norms > 0).all(axis=1)
    r = np.where(ok[:, None, None], r, np.eye(len(free)))
    coef = np.linalg.solve(r, np.einsum("gnm,gn->gm", q, b)[..., None])[..., 0]
    resid = b - np.einsum("gnm,gm->gn", a, coef)
    rss = np.einsum("gn,gn->g", resid, resid)
    return coef, np.where(ok & np.isfinite(rss), rss, np.inf)


def grid_starts(family: Builtin, series: Series, held: Held, count: int) -> list[Start]:
    """The grid's best point and its next-best local minima (at most ``count`` starts)."""
    axes = []
    for name, values in family.axes(series).items():
        if name in held.fixed or name in held.given:
            values = [held.fixed.get(name, held.given.get(name))]
        axes.append(np.unique([held.clip(name, v) for v in values]))
    names = family.nonlinear
    mesh = np.meshgrid(*axes, indexing="ij")
    flat = {name: m.reshape(-1) for name, m in zip(names, mesh, strict=True)}
    coef, rss = conditional_linear(family, series, flat, held.fixed)
    shaped = rss.reshape(mesh[0].shape)
    lowest = ndimage.minimum_filter(shaped, size=3, mode="nearest")
    minima = np.flatnonzero(((shaped <= lowest) & np.isfinite(shaped)).reshape(-1))
    order = minima[np.argsort(rss[minima], kind="stable")]
    starts: list[Start] = []
    seen: list[float] = []
    for index in order:
        if any(np.isclose(rss[index], other, rtol=1e-9, atol=0) for other in seen):
            continue  # a flat stretch of the grid: one start is enough
        seen.append(float(rss[index]))
        values = {name: float(flat[name][index]) for name in names}
        tag = "grid_best" if not starts else f"grid_local_{len(starts) + 1}"
        starts.append(Start(tag, _complete(family, values, coef[index], held)))
        if len(starts) == count:
            break
    return starts


def shape_start(family: Builtin, series: Series, held: Held) -> Start | None:
    """The start read from the data's shape, its linear parameters solved exactly."""
    if family.shape_start is None:
        return None
    guess = family.shape_start(series)
    if guess is None:
        return None
    values = {name: held.clip(name, held.fixed.get(name, held.given.get(name, guess[name])))
              for name in family.nonlinear}
    if not all(np.isfinite(v) for v in values.values()):
        return None
    coef, rss = conditional_linear(family, series, {k: np.array([v]) for k, v in values.items()},
                                   held.fixed)
    if not np.isfinite(rss[0]):
        return None
    return Start("shape", _complete(family, values, coef[0], held))


def automatic_starts(family: Builtin, series: Series, held: Held, count: int = 4) -> list[Start]:
    """Every automatic start, best grid point first, then the shape start and other minima.

    Starts equal to an earlier one (to 1e-9 relative in every parameter) are dropped.
    """
    grid = grid_starts(family, series, held, count)
    shape = shape_start(family, series, held)
    ordered = grid[:1] + ([shape] if shape is not None else []) + grid[1:]
    kept: list[Start] = []
    for start in ordered:
        vector = np.array([start.values[n] for n in family.names])
        if not any(np.allclose(vector, [k.values[n] for n in family.names], rtol=1e-9, atol=0)
                   for k in kept):
            kept.append(start)
    return kept


def _complete(family: Builtin, nonlinear: Mapping[str, float], coef: np.ndarray,
              held: Held) -> dict[str, float]:
    """Every parameter's start: nonlinear from the grid, linear from the projection,
    fixed and given values from the caller, all inside the caller's bounds."""
    free = iter(coef)
    values = {}
    for name in family.names:
        if name in held.fixed:
            values[name] = float(held.fixed[name])
        elif name in family.linear:
            estimate = float(next(free))
            values[name] = held.clip(name, held.given.get(name, estimate))
        else:
            values[name] = float(nonlinear[name])
    return values
