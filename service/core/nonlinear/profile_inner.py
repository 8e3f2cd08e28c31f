"""The constrained re-minimisation behind a profile: one parameter held fixed.

Profiles need many small refits, each warm-started close to its answer, so
this solver is lean rather than general: Levenberg-Marquardt on the normal
equations of the column-scaled weighted Jacobian without column ``j``
(Marquardt's diagonal damping, starting undamped, i.e. Gauss-Newton, because
warm starts are good), projected onto the bounds. It stops on the same
relative-offset criterion as the main solver, computed from the normal
equations (``||Q1'r||^2 = g' (J'J)^-1 g`` with ``g = J'r``). A loose inner
tolerance suffices: the returned sum of squares is the Gauss-Newton
prediction ``S - ||Q1'r||^2`` at the last point, whose error is of higher
order than the offset (about the linear convergence rate times
``||Q1'r||^2``), i.e. about ``1e-10`` of the profile's ``S~ - S`` at the
default tolerance.

Besides the constrained minimum it returns ``dS/dtheta_j`` there (by the
envelope theorem the partial derivative ``-2 r' J_j``: the other parameters
are optimal) and ``d theta_others / d theta_j`` from the linearisation,
which predicts the next warm start.
"""

from __future__ import annotations

import math
from typing import NamedTuple

import numpy as np
from scipy.linalg.lapack import dposv

from service.core.nonlinear.problem import Problem

EPS = float(np.finfo(float).eps)
MAX_DAMPING = 1e12


class Constrained(NamedTuple):
    """One constrained minimum (``theta`` is the full parameter vector)."""

    theta: np.ndarray
    rss: float
    slope: float  # dS/dtheta_j at the constrained minimum
    follow: np.ndarray  # (p,) d theta / d theta_j (1 at j)
    converged: bool
    evaluations: int


def _linearize(problem: Problem, theta: np.ndarray):
    f, jac = problem.values_and_jacobian(theta)
    if f is None or jac is None:
        return None
    sw = problem.sqrt_weights
    rw = sw * (problem.y - f)
    jw = jac if not problem.weighted else sw[:, None] * jac
    return rw, jw, float(rw @ rw), f


def _spd_solve(a: np.ndarray, b: np.ndarray) -> np.ndarray | None:
    """Solve ``a x = b`` for symmetric positive definite ``a`` (None when it is not)."""
    _, x, info = dposv(a, b)
    return x if info == 0 else None


def _not_held(problem: Problem, theta, free, jw, rw) -> np.ndarray:
    """``free`` without the parameters on a bound whose gradient points out of the box."""
    slope = jw[:, free].T @ rw  # > 0: increasing the parameter lowers S
    held = ((theta[free] <= problem.lower[free]) & (slope <= 0)) | \
        ((theta[free] >= problem.upper[free]) & (slope >= 0))
    return free[~held]


def minimize_fixed(problem: Problem, j: int, theta: np.ndarray, *, tolerance: float = 1e-4,
                   max_iterations: int = 60) -> Constrained | None:
    """Minimise the weighted RSS over every parameter but ``j`` (held at ``theta[j]``).

    Returns None when the model or its Jacobian is not finite at ``theta``.
    """
    state = _linearize(problem, theta)
    if state is None:
        return None
    rw, jw, rss, f = state
    rounding = 4.0 * EPS * problem.sqrt_weights * (np.abs(problem.y) + np.abs(f))
    slack = float(2.0 * np.abs(rw) @ rounding + rounding @ rounding)
    free = np.flatnonzero(np.arange(problem.p) != j)
    theta = np.array(theta, dtype=float)
    if free.size == 0:  # a one-parameter model: nothing to re-fit
        return Constrained(theta, rss, float(-2.0 * rw @ jw[:, j]), np.ones(1), True, 1)
    bounded = problem.bounded
    damping, evaluations, converged, predicted = 0.0, 1, False, 0.0
    for _ in range(max_iterations):
        others = _not_held(problem, theta, free, jw, rw) if bounded else free
        lo, hi = problem.lower[others], problem.upper[others]
        po = others.size
        if po == 0:
            converged = True
            break
        jo = jw[:, others]
        a = jo.T @ jo
        d = np.sqrt(a.diagonal())
        d[~(d > 0)] = 1.0
        a_s = a / (d[:, None] * d)
        g_s = (jo.T @ rw) / d
        gn = _spd_solve(a_s, g_s)
        offset = math.inf
        if gn is not None:
            proj2 = max(float(g_s @ gn), 0.0)
            offset = math.sqrt(proj2 / po) / math.sqrt(max(rss - proj2, 1e-300) /
                                                        (problem.n - po))
            if offset <= tolerance or proj2 <= slack:
                converged, predicted = True, proj2
                break
        accepted = False
        while damping <= MAX_DAMPING:
            step = gn if damping == 0.0 else _spd_solve(a_s + damping * np.eye(po), g_s)
            if step is None:
                damping = max(4.0 * damping, 1e-3)
                continue
            cand = theta.copy()
            moved = theta[others] + step / d
            cand[others] = np.minimum(np.maximum(moved, lo), hi) if bounded else moved
            new = _linearize(problem, cand)
            evaluations += 1
            if new is not None and (new[2] < rss or (damping == 0.0 and offset <= 1e-3
                                                     and new[2] <= rss + slack)):
                theta, (rw, jw, rss, _) = cand, new
                damping = 0.0 if damping < 1e-6 else damping / 4.0
                accepted = True
                break
            damping = max(4.0 * damping, 1e-3)
        if not accepted:
            break
    others = _not_held(problem, theta, free, jw, rw) if bounded else free
    jo, held = jw[:, others], jw[:, j]
    follow = np.zeros(problem.p)
    follow[j] = 1.0
    path = _spd_solve(jo.T @ jo, jo.T @ held) if others.size else None
    if path is not None:
        follow[others] = -path
    return Constrained(theta, rss - predicted, float(-2.0 * rw @ held), follow, converged,
                       evaluations)
