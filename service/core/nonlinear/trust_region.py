"""One trust-region phase: scipy.optimize.least_squares with the exact Jacobian.

The phase uses tolerances near machine precision, so scipy stops only when it
can no longer make progress; whether the point is a minimum is decided
afterwards by the engine's own check (:mod:`service.core.nonlinear.polish`).
Non-finite trial points are rejected steps (see :class:`Objective`); a
non-finite Jacobian or an exhausted budget ends the phase at the best point
seen, which is what the phase returns in every case.
"""

from __future__ import annotations

from typing import NamedTuple

import numpy as np
from scipy.optimize import least_squares

from service.core.nonlinear.objective import Objective, StopPhase

# ftol/xtol near 1e-15 as the engine's design asks; gtol at scipy's floor for "lm".
TOLERANCE = 1e-15
GTOL = float(np.finfo(float).eps)


class Strategy(NamedTuple):
    """A scipy method and parameter scaling (``"jac"``: scipy's Jacobian-based scaling)."""

    method: str  # "lm" | "trf" | "dogbox"
    x_scale: str  # "jac" | "unit"


class PhaseEnd(NamedTuple):
    theta: np.ndarray
    rss: float
    reason: str  # "stopped" | "iteration_limit" | "non_finite_model"
    njev: int
    nfev: int


def strategies(bounded: bool, n: int, p: int) -> tuple[Strategy, ...]:
    """The order in which :func:`solve` tries methods from the start values.

    Levenberg-Marquardt (MINPACK) first when unbounded, then the trust-region
    reflective method with Jacobian and with unit scaling: they take different
    paths, so one that stalls on a plateau (a vanishing Jacobian column) is
    often not trapped by the other. With bounds only the bound-aware methods.
    """
    tail = (Strategy("trf", "jac"), Strategy("trf", "unit"), Strategy("dogbox", "jac"))
    if bounded or n < p:
        return tail
    return (Strategy("lm", "jac"),) + tail


def run_phase(objective: Objective, theta0: np.ndarray, strategy: Strategy) -> PhaseEnd:
    """Run one scipy phase from ``theta0``; always return the best point it reached."""
    problem = objective.problem
    nfev0, njev0 = objective.nfev, objective.njev
    objective.best_theta, objective.best_rss = None, np.inf
    remaining = max(objective.max_values - objective.nfev, 1)
    kwargs = dict(jac=objective.scipy_jac,
                  method=strategy.method, ftol=TOLERANCE, xtol=TOLERANCE, gtol=GTOL,
                  x_scale="jac" if strategy.x_scale == "jac" else 1.0, max_nfev=remaining)
    if strategy.method != "lm":
        kwargs["bounds"] = (problem.lower, problem.upper)
    reason = "stopped"
    start = np.clip(theta0, problem.lower, problem.upper)
    try:
        with np.errstate(all="ignore"):
            result = least_squares(objective.scipy_fun, start, **kwargs)
        if result.status == 0:
            reason = "iteration_limit"
    except StopPhase as stop:
        reason = stop.reason
    theta = objective.best_theta if objective.best_theta is not None else start
    return PhaseEnd(np.array(theta, dtype=float), objective.best_rss, reason,
                    objective.njev - njev0, objective.nfev - nfev0)
