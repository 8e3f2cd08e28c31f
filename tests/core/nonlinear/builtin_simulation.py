"""Scoring automatic starts on seeded series of every built-in family against two references
(shared by tests/core/nonlinear/test_builtin_optimum_*.py and
benchmarks/bench_builtin_starts.py; the series and their numpy curves come from
builtin_designs.py).

The reference optimum of a series is the lowest residual sum of squares known for
it: ``scipy.optimize.least_squares`` (MINPACK Levenberg-Marquardt, tolerances 1e-14)
started from the true values and from ``PERTURBATIONS`` random perturbations of them,
or any of the service's own runs if lower; points outside a family's documented
parameter domain (``DOMAINS``) do not count. The service's automatic fit (the fit it
reports) reaches the global optimum when its RSS is at most the reference's (1e-6
relative slack); how many of those did not also pass the engine's convergence check
(a flat valley, such as a logistic slope that the data cannot bound above) is counted
too. ``scipy.optimize.curve_fit`` from its default start (every parameter 1) is scored
the same way for comparison.

Some series have no finite least-squares optimum: the lowest RSS known lies at a
point where a nonlinear parameter has run away (off its true value by a factor of
more than ``RUNAWAY`` either way; the true values of the nonlinear parameters are
all drawn away from 0), e.g. logistic5's asymmetry -> infinity, where the curve
tends to a limit of another form. There is no optimum to reach; when the service
did not reach the reference there, the series is counted apart
(``no_finite_optimum``) and left out of both rates.
"""

from __future__ import annotations

import warnings
from typing import NamedTuple

import numpy as np
from scipy.optimize import OptimizeWarning, curve_fit, least_squares

from tests.core.nonlinear.builtin_designs import DOMAINS, MAKERS, Case, cases

__all__ = ["MAKERS", "Case", "cases", "score", "reference", "automatic_fit"]

RSS_SLACK = 1e-6
PERTURBATIONS = 4
RUNAWAY = 30.0


def rss(case: Case, theta) -> float:
    """Residual sum of squares of ``case`` at ``theta`` (inf where the curve is not finite
    or ``theta`` is outside the family's documented domain)."""
    if not DOMAINS.get(case.family, lambda t: True)(theta):
        return np.inf
    with np.errstate(all="ignore"):
        r = case.y - case.curve(case.x, *theta)
    return float(r @ r) if np.isfinite(r).all() else np.inf


def _residuals(case: Case):
    inside = DOMAINS.get(case.family, lambda t: True)

    def fun(theta):
        with np.errstate(all="ignore"):
            r = case.y - case.curve(case.x, *theta)
        return np.where(np.isfinite(r) & inside(theta), r, 1e100)
    return fun


def reference(case: Case, rng) -> tuple[float, np.ndarray]:
    """The reference optimum: the best RSS (and its point) of least_squares started from the
    truth and from perturbations of it."""
    best, point = np.inf, case.truth
    starts = [case.truth] + [case.truth * np.exp(rng.normal(0, 0.3, case.truth.size))
                             for _ in range(PERTURBATIONS)]
    for start in starts:
        try:
            fit = least_squares(_residuals(case), start, method="lm", xtol=1e-14, ftol=1e-14,
                                gtol=1e-14, max_nfev=20000)
        except ValueError:
            continue
        value = rss(case, fit.x)
        if value < best:
            best, point = value, fit.x
    return best, point


def curve_fit_rss(case: Case) -> float:
    """RSS of scipy.optimize.curve_fit from its default start (all ones); inf if it fails."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", OptimizeWarning)
        warnings.simplefilter("ignore", RuntimeWarning)
        try:
            theta, _ = curve_fit(case.curve, case.x, case.y)
        except (RuntimeError, ValueError):
            return np.inf
    return rss(case, theta)


def reaches(value: float, reference: float) -> bool:
    """True when ``value`` is at (or below) the reference optimum."""
    return value <= reference * (1 + RSS_SLACK) + 1e-300


class Score(NamedTuple):
    """How one family did on ``series`` seeded series."""

    family: str
    series: int
    no_finite_optimum: int
    ours: int        # automatic starts: at the global optimum
    curve_fit: int   # curve_fit from all ones: at the global optimum
    strategies: dict
    not_converged: int = 0  # of ``ours``: at the optimum's RSS without passing the check

    def rates(self) -> tuple[float, float]:
        """Share of the series with a finite optimum that each method reached."""
        scored = self.series - self.no_finite_optimum
        return self.ours / scored, self.curve_fit / scored


def automatic_fit(case: Case):
    """The service's automatic fit of ``case`` (what /v1/fit solves before the analysis)."""
    from service.core.data.inputs import clean_data
    from service.core.nonlinear.builtin.catalogue import BUILTINS
    from service.core.nonlinear.builtin.fit import best_fit
    from service.core.nonlinear.builtin.spec_check import equation
    from service.core.nonlinear.builtin.starts import Held

    family = BUILTINS[case.family]
    scale = case.scale or family.scales[0]
    data = clean_data(case.x, case.y, None, "error")
    return best_fit(family, equation(case.family, scale, ()), data, scale,
                    Held({}, {}, {}, {}))


def score(family: str, count: int, seed: int) -> Score:
    """Fit ``count`` seeded series of ``family`` three ways and count who reached the optimum."""
    rng = np.random.default_rng([seed, 1])
    excluded = ours = other = flat = 0
    strategies: dict[str, int] = {}
    for case in cases(family, count, seed):
        kept = automatic_fit(case)
        ref_rss, ref_point = reference(case, rng)
        low_rss, low_point = rss(case, kept.lowest.estimates), kept.lowest.estimates
        best_rss, best_point = ((low_rss, low_point) if low_rss < ref_rss
                                else (ref_rss, ref_point))
        reached = reaches(rss(case, kept.solution.estimates), best_rss)
        ran_away = _ran_away(case, best_point)
        if not reached and ran_away:
            excluded += 1
            continue
        ours += reached
        flat += reached and not kept.solution.converged
        other += reaches(curve_fit_rss(case), best_rss)
        strategies[kept.start.strategy] = strategies.get(kept.start.strategy, 0) + 1
    return Score(family, count, excluded, ours, other, strategies, flat)


def _ran_away(case: Case, point) -> bool:
    from service.core.nonlinear.builtin.catalogue import BUILTINS

    family = BUILTINS[case.family]
    index = [family.names.index(name) for name in family.nonlinear]
    with np.errstate(all="ignore"):
        ratio = np.abs(np.log(np.abs(np.asarray(point)[index]) / np.abs(case.truth[index])))
    return bool(np.any(~(ratio <= np.log(RUNAWAY))))
