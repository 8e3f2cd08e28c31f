"""Turn the solver's final point into a frozen :class:`Solution` (codes, messages, notices)."""

from __future__ import annotations

import numpy as np

from service.core.nonlinear.objective import Objective, sum_of_squares
from service.core.nonlinear.polish import CONVERGED
from service.core.nonlinear.problem import Problem
from service.core.nonlinear.results import Attempt, Notice, Solution, frozen
from service.core.nonlinear.tangent import gauss_newton_step, null_directions

RUNAWAY_FACTOR = 1e6  # |estimate| beyond this many times max(1, |start|): diverged
ILL_CONDITIONED = 1e8  # condition number of the column-scaled weighted Jacobian


def _names(names, mask) -> str:
    return ", ".join(s for s, m in zip(names, mask, strict=True) if m)


def _termination(problem: Problem, theta0, outcome, objective: Objective) -> tuple[str, str]:
    a = outcome.assessment
    names = problem.parameter_names
    offset = a.relative_offset if a is not None else np.nan
    code = outcome.code
    full_rank = a is not None and a.tangent.rank == int(a.free.sum())
    if code in CONVERGED and not full_rank:
        code = "singular_jacobian"
    with np.errstate(all="ignore"):
        runaway = ~np.isfinite(outcome.theta) | (
            np.abs(outcome.theta) > RUNAWAY_FACTOR * np.maximum(1.0, np.abs(theta0)))
    if code not in CONVERGED and runaway.any():
        j = int(np.flatnonzero(runaway)[0])
        return "diverged", (
            f"{names[j]} ran off to {outcome.theta[j]:.3g} (start {theta0[j]:.3g}); no finite "
            f"estimate was reached: check the model or bound {names[j]}")
    if code in ("stalled", "iteration_limit") and a is not None:
        j = _falls_without_bound(problem, a)
        if j is not None:
            return "diverged", (
                f"the sum of squares keeps falling as {names[j]} moves on from "
                f"{outcome.theta[j]:.6g} without bound (start {theta0[j]:.6g}), so no finite "
                f"estimate fits these data: check the model or bound {names[j]}")
    if code not in CONVERGED and a is not None and not full_rank:
        code = "singular_jacobian"
    messages = {
        "relative_offset": f"converged: relative offset {offset:.2g} (Bates & Watts criterion)",
        "small_gradient": "converged: what the tangent plane can still explain of the residuals "
                          "is at the rounding level of the data (an exact or near-exact fit)",
        "small_step": "converged: the remaining Gauss-Newton correction is below the float64 "
                      f"resolution of the estimates (relative offset {offset:.2g})",
        "iteration_limit": f"stopped after {objective.njev} iterations without meeting the "
                           f"convergence check (relative offset {offset:.2g}); try other "
                           "start values, or hold a parameter the data barely determine "
                           "(large standard error, high correlation) with model.fixed (or a "
                           "number in your equation) or bound it",
        "non_finite_model": "stopped: the model or its derivatives are not finite around the "
                            "last point reached; try other start values or bound the parameters",
        "stalled": "no step lowers the sum of squares although the convergence check is not "
                   f"met (relative offset {offset:.2g}): a parameter may have (almost) no "
                   "effect here; try other start values",
    }
    if code in CONVERGED and a is not None and not a.free.any():
        return code, ("converged: every parameter is held at a bound (the sum of squares "
                      "falls toward each of them)")
    if code == "singular_jacobian":
        involved = null_directions(a.tangent, tuple(s for s, f in zip(names, a.free,
                                                                     strict=True) if f))
        return code, (f"the Jacobian has rank {a.tangent.rank} of {int(a.free.sum())} at the "
                      f"estimates: {', '.join(involved) or 'some parameters'} are not "
                      "separately determined by these data (only a combination is); fitted "
                      "values may be fine but the estimates are not unique")
    return code, messages[code]


def _falls_without_bound(problem: Problem, a) -> int | None:
    """The parameter along which S never rises again, out to a million times its size.

    The ray follows the Gauss-Newton direction, scaled so that its leading
    parameter grows by factors 10 .. 1e6 (relative to ``max(1, |theta_j|)``).
    A sum of squares that never rises beyond rounding along it means the
    infimum lies at infinity (or on an endless plateau): the fit diverges.
    """
    step = np.zeros_like(a.theta)
    step[a.free] = gauss_newton_step(a.tangent, a.rw)
    size = np.abs(step) / np.maximum(1.0, np.abs(a.theta))
    if not np.isfinite(size).all() or size.max() == 0:
        return None
    j = int(np.argmax(size))
    rss = a.rss
    for k in range(1, 7):
        theta = a.theta + (10.0 ** k / size[j]) * step
        if (theta < problem.lower).any() or (theta > problem.upper).any():
            return None
        f = problem.values(theta)
        if f is None:
            return None
        new = sum_of_squares(problem.sqrt_weights * (problem.y - f))
        if new > rss + a.slack:
            return None
        rss = min(rss, new)
    return j


def _notices(problem: Problem, outcome, objective: Objective, attempts) -> tuple[Notice, ...]:
    out: list[Notice] = []
    a = outcome.assessment
    names = problem.parameter_names
    if a is not None:
        for s, status in zip(names, a.bound_status, strict=True):
            if status != "free":
                out.append(Notice("parameter_at_bound", f"{s} is at its {status} bound; its "
                                  "standard error and Wald limits ignore the bound"))
        if a.tangent.rank < int(a.free.sum()):
            out.append(Notice("jacobian_rank_deficient",
                              f"the Jacobian has rank {a.tangent.rank} of {int(a.free.sum())}"))
        elif a.tangent.condition > ILL_CONDITIONED:
            out.append(Notice("ill_conditioned_jacobian", (
                f"the column-scaled Jacobian has condition number {a.tangent.condition:.3g}: "
                "some estimates are nearly confounded, so their standard errors are large")))
    if objective.non_finite:
        out.append(Notice("non_finite_trial_points", (
            f"the model was not finite at {objective.non_finite} trial points; those steps "
            "were rejected")))
    if len(attempts) > 1:
        trail = "; ".join(f"{t.method}/{t.x_scale}: {t.outcome}" for t in attempts)
        out.append(Notice("restarted", f"restarted from the start values with other methods "
                                       f"({trail})"))
    return tuple(out)


def build_solution(problem: Problem, theta0, outcome, objective: Objective,
                   attempts: tuple[Attempt, ...]) -> Solution:
    """Evaluate the model at the final point and freeze everything into a Solution."""
    theta = np.asarray(outcome.theta, dtype=float)
    f, jac = problem.values_and_jacobian(theta)
    n, p = problem.n, problem.p
    if f is None:
        f = np.full(n, np.nan)
    if jac is None:
        jac = np.full((n, p), np.nan)
    code, message = _termination(problem, theta0, outcome, objective)
    a = outcome.assessment
    r = problem.y - f
    rw = problem.sqrt_weights * r
    jac = np.array(jac)
    jac.setflags(write=False)
    return Solution(
        problem=problem, parameter_names=problem.parameter_names, start=frozen(theta0),
        estimates=frozen(theta), fitted=frozen(f), residuals=frozen(r),
        weighted_residuals=frozen(rw), jacobian=jac, rss=float(rw @ rw),
        iterations=objective.njev, nfev=objective.nfev, njev=objective.njev,
        termination=code, message=message, converged=code in CONVERGED,
        relative_offset=a.relative_offset if a is not None else np.nan,
        gradient_norm=a.gradient_norm if a is not None else np.nan,
        bound_status=a.bound_status if a is not None else ("free",) * p,
        rank=a.tangent.rank if a is not None else 0,
        condition_number=a.tangent.condition if a is not None else np.inf,
        attempts=attempts, notices=_notices(problem, outcome, objective, attempts))
