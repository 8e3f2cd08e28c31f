"""Nonlinear least squares: :func:`solve` and the :class:`Solution` it returns.

Method, in order:

1. Validate the data and start values (typed errors naming the field).
2. A trust-region phase (scipy ``least_squares``: MINPACK Levenberg-Marquardt
   when unbounded, else trust-region reflective) with the model's exact
   Jacobian, Jacobian-based parameter scaling and tolerances near machine
   precision (:mod:`~service.core.nonlinear.trust_region`).
3. The engine's own check -- Bates & Watts relative offset, with float64
   floors -- and a Gauss-Newton polish until it is met
   (:mod:`~service.core.nonlinear.polish`).
4. If the check still fails (a plateau where a Jacobian column vanishes, a
   stall, a non-finite region), restart from the start values with the next
   method/scaling; keep the first point that passes, else the lowest sum of
   squares. One budget of ``max_iterations`` Jacobian evaluations covers all
   phases.

Nothing the model does during the iterations raises: NaN/inf trial points are
rejected steps, and a run that cannot go on returns a non-converged
:class:`Solution` whose ``termination`` says why.
"""

from __future__ import annotations

from typing import NamedTuple

import numpy as np

from service.core.errors import SpecError
from service.core.nonlinear.objective import Objective
from service.core.nonlinear.polish import CONVERGED, Assessment, PolishEnd, assess, polish
from service.core.nonlinear.problem import check_start, make_problem
from service.core.nonlinear.results import Attempt, Solution
from service.core.nonlinear.solver_report import build_solution
from service.core.nonlinear.trust_region import run_phase, strategies

DEFAULT_TOLERANCE = 1e-8
DEFAULT_MAX_ITERATIONS = 2000
VALUES_PER_ITERATION = 20  # model-evaluation budget per Jacobian evaluation


@np.errstate(all="ignore")  # floating-point trouble is data here, never a warning
def solve(model, x, y, start, *, weights=None, lower=None, upper=None,
          max_iterations: int = DEFAULT_MAX_ITERATIONS,
          tolerance: float = DEFAULT_TOLERANCE) -> Solution:
    """Least-squares estimates of ``model`` parameters for data ``(x, y)``.

    Parameters
    ----------
    model : object
        Has ``parameter_names``, ``values(x, theta)``, ``jacobian(x, theta)``
        and ``values_and_jacobian(x, theta)`` (exact derivatives).
    x : array_like
        Predictor(s); the first axis indexes observations, passed to the model.
    y : array_like
        Responses, shape ``(n,)``, finite.
    start : array_like
        Start values, one per parameter, finite, inside the bounds.
    weights : array_like, optional
        Inverse variances (> 0); residuals are weighted by ``sqrt(w)``.
    lower, upper : array_like, optional
        Bounds per parameter (``-inf``/``inf`` for none).
    max_iterations : int
        Budget of Jacobian evaluations over all phases.
    tolerance : float
        Relative-offset criterion (Bates & Watts 1981).

    Returns
    -------
    Solution

    Raises
    ------
    DataError, DesignError, SpecError
        Invalid data or weights, too few points, bad start values or bounds, or a
        model (or its Jacobian) that is not finite at the start values
        (field ``"model.parameters"``).
    """
    problem = make_problem(model, x, y, weights=weights, lower=lower, upper=upper)
    theta0, _, _ = check_start(problem, start)
    if not 0 < tolerance < 1:
        raise SpecError("the convergence tolerance must lie between 0 and 1",
                        field="options.tolerance", fix="use e.g. 1e-8")
    if int(max_iterations) < 1:
        raise SpecError("the iteration budget must be at least 1",
                        field="options.max_iterations", fix="use e.g. 2000")
    objective = Objective(problem, int(max_iterations),
                          VALUES_PER_ITERATION * int(max_iterations))
    attempts: list[Attempt] = []
    best: Outcome | None = None
    for strategy in strategies(problem.bounded, problem.n, problem.p):
        if objective.exhausted:
            break
        iterations, nfev = objective.njev, objective.nfev
        outcome = _run(objective, theta0, strategy, tolerance)
        attempts.append(Attempt(strategy.method, strategy.x_scale, outcome.code, outcome.rss,
                                objective.njev - iterations, objective.nfev - nfev))
        if best is None or _better(outcome, best):
            best = outcome
        if outcome.code in CONVERGED:
            break
    if best is None:  # budget of zero phases: report the start values
        best = _outcome(objective, theta0, PolishEnd(None, "iteration_limit"),
                        "iteration_limit", tolerance)
    return build_solution(problem, theta0, best, objective, tuple(attempts))


def _run(objective: Objective, theta0, strategy, tolerance) -> Outcome:
    """A phase from the start values and its polish; if the polish made progress but did
    not converge, one more phase of the same method from the polished point."""
    theta, outcome = theta0, None
    for _ in range(2):
        phase = run_phase(objective, theta, strategy)
        end = polish(objective, phase.theta, tolerance)
        code = end.code
        if phase.reason != "stopped" and code not in CONVERGED:
            code = phase.reason
        outcome = _outcome(objective, phase.theta, end, code, tolerance)
        moved = outcome.assessment is not None and outcome.rss < phase.rss - \
            outcome.assessment.slack
        if code in CONVERGED or objective.exhausted or not moved:
            break
        theta = outcome.theta
    return outcome


class Outcome(NamedTuple):
    theta: np.ndarray
    assessment: Assessment | None  # None when the Jacobian is not finite at theta
    code: str
    rss: float


def _outcome(objective: Objective, theta, end: PolishEnd, code: str, tolerance) -> Outcome:
    """The point a phase plus polish reached, assessed (directly when the budget ran out)."""
    a = end.assessment
    if a is None:
        problem = objective.problem
        f, jac = problem.values_and_jacobian(theta)
        objective.nfev += 1
        if f is not None and jac is not None:
            sw = problem.sqrt_weights
            a = assess(objective, theta, sw * (problem.y - f), sw[:, None] * jac, tolerance)
        elif f is not None:
            rw = problem.sqrt_weights * (problem.y - f)
            return Outcome(np.asarray(theta, float), None, code, float(rw @ rw))
        else:
            return Outcome(np.asarray(theta, float), None, code, np.inf)
    return Outcome(a.theta, a, code, a.rss)


def _better(new: Outcome, old: Outcome) -> bool:
    if (new.code in CONVERGED) != (old.code in CONVERGED):
        return new.code in CONVERGED
    return new.rss < old.rss
