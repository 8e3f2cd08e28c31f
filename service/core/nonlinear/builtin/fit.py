"""Fitting a built-in family: automatic starts, several solves, the best converged fit kept.

Every automatic start (:mod:`.starts`) is solved with the shared engine
(:func:`~service.core.nonlinear.solver.solve`, exact derivatives of the compiled
equation) on a short budget of ``EXPLORE_ITERATIONS``; the fit kept is the
converged one with the lowest residual sum of squares. When the lowest of all did
not converge, it is solved on from where it stopped with the engine's full budget
(and kept if it then converges lower, or if nothing converged). When a
start that did not converge got lower than the kept fit, the report says so
(notice ``lower_rss_not_converged``: the optimum may lie at the edge of the
parameter space, e.g. logistic5's asymmetry -> infinity). The caller's complete
start values replace the search (``started_from = "given"``). The kept
estimates are written in the family's documented convention (e.g. slope > 0
for logistic4) and analysed like any nonlinear fit
(:func:`~service.core.nonlinear.analysis.report`), with the family's derived
quantities added.
"""

from __future__ import annotations

from dataclasses import replace
from typing import NamedTuple

import numpy as np

from service.core.checks.known_sd import require_weights
from service.core.data.grid import fit_grid
from service.core.data.inputs import clean_data
from service.core.errors import DesignError, SpecError
from service.core.nonlinear.analysis import report
from service.core.nonlinear.builtin.constraints import constraint_notices
from service.core.nonlinear.builtin.definition import LOG, Builtin, series_of
from service.core.nonlinear.builtin.derived import derived_notices, derived_rows
from service.core.nonlinear.builtin.domain import check_grid, refuse_negative
from service.core.nonlinear.builtin.spec_check import check_spec, equation, scale_of
from service.core.nonlinear.builtin.starts import Held, Start, automatic_starts
from service.core.nonlinear.polish import CONVERGED
from service.core.nonlinear.report import NonlinearReport
from service.core.nonlinear.results import Solution
from service.core.nonlinear.solver import solve
from service.core.results import Notice
from service.core.spec import FitOptions, ModelSpec

SAME_RSS = 1e-9  # relative: two fits this close in RSS are the same optimum
EXPLORE_ITERATIONS = 150  # Jacobian evaluations per automatic start (a converging start
#                           needs a few dozen; a run-away would spend the whole budget)


class Kept(NamedTuple):
    """The fit kept among the starts: its solution, where it started, how many were solved,
    and the lowest solution of all (converged or not)."""

    solution: Solution
    start: Start
    tried: int
    lowest: Solution


def fit_series(family: Builtin, x, y, weights=None, *, model: ModelSpec,
               options: FitOptions) -> NonlinearReport:
    """Fit ``family`` to one series from automatic (or the caller's) start values.

    Raises
    ------
    DataError, DesignError, SpecError
        Each names the offending field and how to fix it.
    """
    check_spec(family, model, options)
    require_weights(options.weighting, weights)
    scale = scale_of(family, model)
    fixed = tuple(model.fixed or ())
    compiled = equation(family.name, scale, fixed)
    free = compiled.parameter_names
    held = Held(dict(fixed), dict(model.parameters or ()), dict(model.lower or ()),
                dict(model.upper or ()))
    with np.errstate(all="ignore"):
        data = clean_data(x, y, weights, options.missing)
        _check_data(family, scale, data.x, len(free))
        if options.grid is not None:  # before the solve: a grid outside the domain is refused
            check_grid(family, scale, options.grid, fit_grid(options, data.x, scale == LOG))
        kept = best_fit(family, compiled, data, scale, held)
        kept = _canonical(family, compiled, data, held, kept)
        start = np.array([kept.start.values[name] for name in free])
        given = kept.start.strategy == "given"
        out = report(kept.solution, data, compiled, free, family.name, compiled.text, start,
                     options=options, started_from="given" if given else "automatic",
                     start_strategy=kept.start.strategy, starts_tried=kept.tried,
                     log_x=scale == LOG)
        return replace(out, derived=derived_rows(family, out),
                       warnings=out.warnings + _lower_elsewhere(kept, free)
                       + derived_notices(family, out)
                       + constraint_notices(family, out, float(data.x.min()),
                                            float(data.x.max())))


def best_fit(family: Builtin, compiled, data, scale: str, held: Held) -> Kept:
    """Solve from every start; keep the converged fit with the lowest RSS.

    A start where the model is not finite is passed over; ``SpecError`` naming
    ``model.parameters`` when no start could be solved.
    """
    free = compiled.parameter_names
    lower = np.array([held.lower.get(n, -np.inf) for n in free])
    upper = np.array([held.upper.get(n, np.inf) for n in free])
    if all(n in held.given for n in free):
        starts = [Start("given", {**held.fixed, **held.given})]
    else:
        starts = automatic_starts(family, series_of(data.x, data.y, data.w, scale), held)
    if not starts:
        raise _no_start(family, held)
    explore = starts[0].strategy != "given"   # automatic starts: the short budget
    best: Kept | None = None
    lowest: Kept | None = None
    tried = 0
    for start in starts:
        try:
            solution = solve_start(compiled, data, start, lower, upper,
                                   EXPLORE_ITERATIONS if explore else None)
        except SpecError:
            if start.strategy == "given":
                raise
            continue
        tried += 1
        found = Kept(solution, start, 0, solution)
        if lowest is None or solution.rss < lowest.solution.rss:
            lowest = found
        if best is None or _better(solution, best.solution):
            best = found
    if best is None:
        raise _no_start(family, held)
    if explore and lowest.solution.termination not in CONVERGED:  # on with the full budget
        try:
            more = solve(compiled, data.x, data.y, lowest.solution.estimates, weights=data.w,
                         lower=lower, upper=upper)
        except SpecError:  # stopped where the derivatives are no longer finite
            more = lowest.solution
        if _better(more, best.solution):
            best = lowest._replace(solution=more)
        if more.rss < lowest.solution.rss:
            lowest = lowest._replace(solution=more)
    return best._replace(tried=tried, lowest=lowest.solution)


def solve_start(compiled, data, start: Start, lower: np.ndarray, upper: np.ndarray,
                max_iterations: int | None = EXPLORE_ITERATIONS) -> Solution:
    """One start's solve as :func:`best_fit` does it (``max_iterations`` None: the
    engine's full budget, for given starts); ``SpecError`` when the curve is not finite
    there. The compiled batch re-solves the starts its own solver could not with this."""
    budget = {} if max_iterations is None else {"max_iterations": max_iterations}
    return solve(compiled, data.x, data.y, [start.values[n] for n in compiled.parameter_names],
                 weights=data.w, lower=lower, upper=upper, **budget)


def _better(new: Solution, old: Solution) -> bool:
    new_ok, old_ok = new.termination in CONVERGED, old.termination in CONVERGED
    if new_ok != old_ok:
        return new_ok
    return new.rss < old.rss * (1.0 - SAME_RSS)


def _no_start(family: Builtin, held: Held) -> SpecError:
    """No start could be solved: with fixed values, they are the first suspects."""
    if held.fixed:
        shown = ", ".join(f"{n}={v:g}" for n, v in held.fixed.items())
        rules = "; ".join(f"{p.name}: {p.constraint}" for p in family.parameters
                          if p.name in held.fixed)
        return SpecError(f"No start made the {family.name} curve finite at every x with the "
                         f"fixed values {shown} (constraints: {rules}).", field="model.fixed",
                         fix="Fix values that meet the constraints (GET /v1/families), or "
                             "leave those parameters free.")
    return SpecError(f"No start made the {family.name} curve finite at every x.",
                     field="model.parameters",
                     fix="Give start values for the parameters in model.parameters, or "
                         "check that the data suit this family.")


def _lower_elsewhere(kept: Kept, free: tuple[str, ...]) -> tuple[Notice, ...]:
    low, fit = kept.lowest, kept.solution
    if low.termination in CONVERGED or not low.rss < fit.rss * (1.0 - SAME_RSS):
        return ()
    where = ", ".join(f"{n}={v:.4g}" for n, v in zip(free, low.estimates, strict=True))
    return (Notice("lower_rss_not_converged",
                   f"A start that did not converge reached a lower residual sum of squares "
                   f"({low.rss:.6g}, against {fit.rss:.6g} here) at {where}: the least-squares "
                   "optimum may lie at the edge of the parameter space (a parameter heading "
                   "to 0 or infinity). A simpler family, bounds or fixed values may suit the "
                   "data better."),)


def _canonical(family: Builtin, compiled, data, held: Held, kept: Kept) -> Kept:
    """The same curve in the family's documented convention (solved again from there)."""
    if family.canonical is None:
        return kept
    free = compiled.parameter_names
    values = {**held.fixed, **dict(zip(free, kept.solution.estimates.tolist(), strict=True))}
    written = family.canonical(values)
    vector = np.array([written[n] for n in free])
    if np.array_equal(vector, kept.solution.estimates) or any(
            n in held.fixed and written[n] != held.fixed[n] for n in family.names):
        return kept
    lower = np.array([held.lower.get(n, -np.inf) for n in free])
    upper = np.array([held.upper.get(n, np.inf) for n in free])
    if ((vector < lower) | (vector > upper)).any():
        return kept
    solution = solve(compiled, data.x, data.y, vector, weights=data.w, lower=lower, upper=upper)
    if solution.termination not in CONVERGED or solution.rss > kept.solution.rss * (1 + SAME_RSS):
        return kept
    return kept._replace(solution=solution,
                         start=Start(f"{kept.start.strategy}_rewritten", written))


def _check_data(family: Builtin, scale: str, x: np.ndarray, p: int) -> None:
    if x.size < p:
        raise DesignError(f"{x.size} points cannot determine {p} parameters.", field="x",
                          fix=f"Send at least {p} points (5 per parameter is common practice).")
    refuse_negative(family, scale, x, point=lambda i: f"x[{i}] = {float(x[i])!r}",
                    field=lambda i: f"x[{i}]", send="send only x >= 0")
    if scale == LOG and np.unique(x[x > 0]).size < 2:
        raise DesignError("The log scale needs at least two distinct x > 0.", field="x",
                          fix='Send more doses, or use model.scale = "linear".')
