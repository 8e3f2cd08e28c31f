"""Reading start values off the data's shape: ends, level crossings, straight-line fits.

These are the classical hand methods (asymptotes from the extremes, midpoints
by interpolation, rates from linearizations); each returns None rather than a
number it cannot support, and the grid search covers that case.
"""

from __future__ import annotations

import numpy as np

END_FRACTION = 0.15  # share of the points (by x) that stands for an end of the curve


def by_u(u: np.ndarray, y: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Distinct ``u`` in increasing order with the mean ``y`` at each (replicates pooled)."""
    keep = ~np.isnan(u)
    levels, inverse = np.unique(u[keep], return_inverse=True)
    means = np.bincount(inverse, weights=y[keep]) / np.bincount(inverse)
    return levels, means


def ends(u: np.ndarray, y: np.ndarray) -> tuple[float, float]:
    """Mean y over the lowest and over the highest ``END_FRACTION`` of the distinct u."""
    levels, means = by_u(u, y)
    k = max(1, int(round(END_FRACTION * levels.size)))
    return float(means[:k].mean()), float(means[-k:].mean())


def crossing(u: np.ndarray, y: np.ndarray, level: float) -> float | None:
    """The first u where the pooled curve crosses ``level``, by linear interpolation."""
    levels, means = by_u(u, y)
    finite = np.isfinite(levels)
    levels, means = levels[finite], means[finite]
    above = means >= level
    change = np.flatnonzero(above[1:] != above[:-1])
    if change.size == 0:
        return None
    i = int(change[0])
    u0, u1, y0, y1 = levels[i], levels[i + 1], means[i], means[i + 1]
    if y1 == y0:
        return float(0.5 * (u0 + u1))
    return float(u0 + (level - y0) * (u1 - u0) / (y1 - y0))


def line(u: np.ndarray, v: np.ndarray) -> tuple[float, float] | None:
    """Least-squares intercept and slope of ``v`` on ``u`` over the finite pairs."""
    keep = np.isfinite(u) & np.isfinite(v)
    if np.unique(u[keep]).size < 2:
        return None
    with np.errstate(all="ignore"):
        du = u[keep] - u[keep].mean()
        slope = float(du @ (v[keep] - v[keep].mean()) / (du @ du))
        intercept = float(v[keep].mean() - slope * u[keep].mean())
    return (intercept, slope) if np.isfinite(slope) and np.isfinite(intercept) else None


def logit_slope(u: np.ndarray, y: np.ndarray, left: float, right: float) -> float | None:
    """Slope of logit((y - left) / (right - left)) on u over the points well inside (0, 1)."""
    if right == left:
        return None
    p = (y - left) / (right - left)
    inside = (p > 0.05) & (p < 0.95) & np.isfinite(u)
    if np.unique(u[inside]).size < 2:
        return None
    fit = line(u[inside], np.log(p[inside] / (1 - p[inside])))
    return None if fit is None else fit[1]
