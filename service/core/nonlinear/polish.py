"""The engine's own convergence check and a Gauss-Newton polish that enforces it.

Convergence is judged at a point, not from the path that led there (Bates &
Watts 1981; Bates & Watts 1988, sec. 2.2.3): the *relative offset*
``(||Q1' r|| / sqrt(p)) / (||r - Q1 Q1' r|| / sqrt(n - p))`` compares the part
of the residual the tangent plane can still explain with the part it cannot;
below ``tolerance`` the remaining change of the estimates is that fraction of
their statistical uncertainty. Two further stops acknowledge float64 limits:
``small_gradient`` when ``||Q1' r||`` is at the rounding level of the data
(exact or near-exact fits, where the relative offset is noise over noise), and
``small_step`` when the Gauss-Newton correction no longer changes the
estimates beyond rounding, or when, with the relative offset already below
``FLAT_OFFSET``, no trial point lowers either the sum of squares beyond its
rounding or the relative offset (float64 cannot confirm any further step).
Failing all that, ``stalled`` (no acceptable step), ``singular_jacobian``
(rank-deficient tangent plane) or ``iteration_limit`` tell the solver to try
another method.

The polish takes Gauss-Newton steps (minimum-norm, from the SVD of the
column-scaled weighted Jacobian) with step halving. Close to a minimum the sum
of squares is flat to first order and cannot confirm a step in float64, so a
full step that keeps the sum of squares within rounding of its value is
accepted when the relative offset is already small, and kept only if it
lowers the relative offset. Parameters pressed against a bound with the
gradient pointing outward are held there; steps are projected onto the box.
"""

from __future__ import annotations

from typing import NamedTuple

import numpy as np

from service.core.nonlinear.objective import Objective, StopPhase, sum_of_squares
from service.core.nonlinear.tangent import (
    EPS,
    Tangent,
    gauss_newton_step,
    gradient_cosine,
    projection,
    relative_offset,
    tangent,
)

FLAT_OFFSET = 1e-3  # below this the tangent-plane model is trusted for flat steps
MAX_HALVINGS = 40
CONVERGED = frozenset({"relative_offset", "small_gradient", "small_step"})


class Assessment(NamedTuple):
    theta: np.ndarray
    rw: np.ndarray
    jw: np.ndarray
    rss: float
    free: np.ndarray  # bool (p,)
    bound_status: tuple[str, ...]
    tangent: Tangent  # of the free columns
    relative_offset: float
    gradient_norm: float
    slack: float  # rounding uncertainty of rss in float64
    code: str  # a CONVERGED code, or "" when the check is not met


def _bound_status(objective: Objective, theta, jw, rw) -> tuple[np.ndarray, tuple[str, ...]]:
    problem = objective.problem
    slope = jw.T @ rw  # -dS/dtheta / 2: moving theta_j up lowers S when positive
    at_lower = (theta <= problem.lower) & (slope <= 0)
    at_upper = (theta >= problem.upper) & (slope >= 0)
    status = tuple("lower" if lo else "upper" if hi else "free"
                   for lo, hi in zip(at_lower, at_upper, strict=True))
    return ~(at_lower | at_upper), status


def assess(objective: Objective, theta, rw, jw, tolerance: float) -> Assessment:
    """Evaluate the convergence check at ``theta`` (weighted residuals and Jacobian given)."""
    free, status = _bound_status(objective, theta, jw, rw)
    jf = jw[:, free]
    t = tangent(jf)
    offset = relative_offset(t, rw)
    cosine = gradient_cosine(jf, rw)
    proj, _ = projection(t, rw)
    problem = objective.problem
    f = problem.y - rw / problem.sqrt_weights
    rounding = 4.0 * EPS * problem.sqrt_weights * (np.abs(problem.y) + np.abs(f))
    slack = float(2.0 * np.abs(rw) @ rounding + rounding @ rounding)
    floor = 2.0 * np.sqrt(max(t.rank, 1)) * float(rounding.max())
    code = ""
    if t.rank == jf.shape[1]:
        if offset <= tolerance:
            code = "relative_offset"
        elif proj <= floor:
            code = "small_gradient"
    return Assessment(theta, rw, jw, sum_of_squares(rw), free, status, t, offset, cosine, slack,
                      code)


class PolishEnd(NamedTuple):
    assessment: Assessment | None
    code: str  # a CONVERGED code, "stalled", "iteration_limit", "non_finite_model"


def _unless_singular(a: Assessment, code: str) -> str:
    return code if a.tangent.rank == int(a.free.sum()) else "singular_jacobian"


def _small(step: np.ndarray, theta: np.ndarray) -> bool:
    return bool(np.all(np.abs(step) <= 4.0 * EPS * np.abs(theta)))


def polish(objective: Objective, theta: np.ndarray, tolerance: float,
           max_steps: int = 30) -> PolishEnd:
    """Gauss-Newton polish from ``theta`` until the check is met (see module docstring)."""
    current: Assessment | None = None
    try:
        rw, jw, _ = objective.linearize(theta)
        if rw is None:
            return PolishEnd(None, "non_finite_model")
        current = assess(objective, theta, rw, jw, tolerance)
        for _ in range(max_steps):
            if current.code:
                return PolishEnd(current, current.code)
            step = np.zeros_like(theta)
            step[current.free] = gauss_newton_step(current.tangent, current.rw)
            if _small(step, current.theta):
                return PolishEnd(current, _unless_singular(current, "small_step"))
            nxt = _line_search(objective, current, step, tolerance)
            if nxt is None:
                rounding_limited = current.relative_offset <= FLAT_OFFSET
                return PolishEnd(current, _unless_singular(
                    current, "small_step" if rounding_limited else "stalled"))
            current = nxt
        return PolishEnd(current, current.code or "iteration_limit")
    except StopPhase as stop:
        return PolishEnd(current, current.code if current and current.code else stop.reason)


def _line_search(objective: Objective, current: Assessment, step: np.ndarray,
                 tolerance: float) -> Assessment | None:
    """Step halving on the box-projected Gauss-Newton step; None when nothing is accepted.

    A trial point is accepted when its sum of squares is lower beyond rounding,
    or -- once the relative offset is below ``FLAT_OFFSET``, where the sum of
    squares is flat to first order -- when it is equal within rounding and the
    relative offset (which float64 resolves) falls. When the full step leaves
    the box, the first trial only moves the parameter that would reach its bound
    first onto it (the others' step assumed it free); once it sits exactly on
    the bound the next check holds it there.
    """
    problem = objective.problem
    target = current.theta + step
    outside = (target < problem.lower) | (target > problem.upper)
    trials = []
    if outside.any():
        bound = np.where(target < problem.lower, problem.lower, problem.upper)
        with np.errstate(all="ignore"):
            reach = np.where(outside, (bound - current.theta) / step, np.inf)
        first = int(np.argmin(reach))
        snap = current.theta.copy()
        snap[first] = bound[first]
        trials.append((snap, True))
    t = 1.0
    for _ in range(MAX_HALVINGS):
        trials.append((np.clip(current.theta + t * step, problem.lower, problem.upper), False))
        t *= 0.5
    for cand, snapping in trials:
        if np.array_equal(cand, current.theta):
            return None
        _, rss = objective.residuals(cand)
        flat = (current.relative_offset <= FLAT_OFFSET or snapping) and \
            rss <= current.rss + current.slack
        if rss < current.rss - current.slack or flat:
            rw, jw, _ = objective.linearize(cand)
            if rw is None:
                return None
            nxt = assess(objective, cand, rw, jw, tolerance)
            if not flat or snapping or nxt.code or \
                    nxt.relative_offset < current.relative_offset:
                return nxt
    return None
