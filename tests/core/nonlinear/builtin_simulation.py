"""Seeded synthetic series of every built-in family, and the two references they are scored
against (shared by tests/core/nonlinear/test_builtin_global_optimum.py and
benchmarks/bench_builtin_starts.py).

Each family's curve is written again here in plain numpy, independently of the
service's equation text. The reference optimum of a series is the lowest residual
sum of squares known for it: ``scipy.optimize.least_squares`` (MINPACK
Levenberg-Marquardt, tolerances 1e-14) started from the true values and from
``PERTURBATIONS`` random perturbations of them, or any of the service's own runs
if lower; points outside a family's documented parameter domain (``DOMAINS``) do
not count. The service's automatic fit (the fit it reports) reaches the global
optimum when its RSS is at most the reference's (1e-6 relative slack); how many
of those did not also pass the engine's convergence check (a flat valley, such as
a logistic slope that the data cannot bound above) is counted too.
``scipy.optimize.curve_fit`` from its default start (every parameter 1) is
scored the same way for comparison.

Some series have no finite least-squares optimum: the lowest RSS known lies at a
point where a nonlinear parameter has run away (off its true value by a factor of
more than ``RUNAWAY`` either way; the true values of the nonlinear parameters are
all drawn away from 0), e.g. logistic5's asymmetry -> infinity, where the curve
tends to a limit of another form. There is no optimum to reach; when the service
did not reach the reference there, the series is counted apart
(``no_finite_optimum``) and left out of both rates.

Designs, parameter ranges and noise are invented but typical of each kind of
experiment (dose-response plates, growth curves, decay and kinetics runs,
chromatographic peaks); every draw is bounded.
"""

from __future__ import annotations

import warnings
from typing import NamedTuple

import numpy as np
from scipy.optimize import OptimizeWarning, curve_fit, least_squares

RSS_SLACK = 1e-6
PERTURBATIONS = 4
RUNAWAY = 30.0


def _log4(x, y_left, y_right, slope, ec50):
    return y_right + (y_left - y_right) / (1 + (x / ec50) ** slope)


def _lin4(x, y_left, y_right, slope, ec50):
    return y_right + (y_left - y_right) / (1 + np.exp(slope * (x - ec50)))


def _log5(x, y_left, y_right, slope, ec50, g):
    return y_right + (y_left - y_right) / (1 + (2 ** (1 / g) - 1) * (x / ec50) ** slope) ** g


def _exponential(x, y0, plateau, k):
    return plateau + (y0 - plateau) * np.exp(-k * x)


def _michaelis_menten(x, vmax, km):
    return vmax * x / (km + x)


def _gompertz(x, asymptote, rate, inflection):
    return asymptote * np.exp(-np.exp(-rate * (x - inflection)))


def _logistic_growth(x, asymptote, rate, inflection):
    return asymptote / (1 + np.exp(-rate * (x - inflection)))


def _power(x, coefficient, exponent):
    return coefficient * x ** exponent


def _gaussian(x, baseline, height, centre, width):
    return baseline + height * np.exp(-0.5 * ((x - centre) / width) ** 2)


def _biexponential(x, a_fast, k_fast, a_slow, k_slow):
    return a_fast * np.exp(-k_fast * x) + a_slow * np.exp(-k_slow * x)


def _weibull(x, y0, plateau, tau, shape):
    return plateau + (y0 - plateau) * np.exp(-(x / tau) ** shape)


DOMAINS = {  # the documented constraints (GET /v1/families) the reference must respect
    "michaelis_menten": lambda t: t[1] > 0,
    "weibull": lambda t: t[2] > 0 and t[3] > 0,
}


class Case(NamedTuple):
    """One synthetic series: its family, x scale, data, true values and the numpy curve."""

    family: str
    scale: str | None
    x: np.ndarray
    y: np.ndarray
    truth: np.ndarray
    curve: object


def _doses(rng, levels, replicates, zero):
    x = np.repeat(np.geomspace(1e-3, 1e-3 * 10 ** rng.uniform(3, 4.5), levels), replicates)
    return np.concatenate([np.zeros(replicates), x]) if zero else x


def _logistic_case(rng, five: bool):
    log = five or rng.uniform() < 0.75
    x = _doses(rng, int(rng.integers(8, 13)), int(rng.integers(2, 4)),
               zero=log and rng.uniform() < 0.3) if log else np.repeat(
        np.linspace(0, 10, int(rng.integers(8, 13))), int(rng.integers(2, 4)))
    positive = x[x > 0]
    lo, hi = (np.log(positive.min()), np.log(positive.max())) if log else (x.min(), x.max())
    mid = rng.uniform(lo + 0.25 * (hi - lo), hi - 0.25 * (hi - lo))
    left = rng.uniform(0, 1)
    right = left + rng.choice([-1, 1]) * rng.uniform(1, 5)
    slope = rng.uniform(0.6, 3.0) * (1.0 if log else 10 / (hi - lo) / 2)
    truth = [left, right, slope, float(np.exp(mid)) if log else mid]
    if five:
        truth.append(float(np.exp(rng.uniform(np.log(0.3), np.log(3)))))
    curve = _log5 if five else (_log4 if log else _lin4)
    sd = rng.uniform(0.02, 0.04 if five else 0.05) * abs(right - left)
    return Case("logistic5" if five else "logistic4", "log" if log else "linear", x,
                curve(x, *truth) + rng.normal(0, sd, x.size), np.array(truth), curve)


def _exponential_case(rng):
    end = rng.uniform(5, 50)
    x = np.sort(rng.uniform(0, end, int(rng.integers(10, 21))))
    truth = [rng.uniform(-5, 20), rng.uniform(-5, 20), rng.uniform(1, 6) / end]
    sd = rng.uniform(0.02, 0.05) * max(abs(truth[0] - truth[1]), 1.0)
    return _case("exponential", x, truth, sd, _exponential, rng)


def _mm_case(rng):
    x = np.geomspace(1, 10 ** rng.uniform(1.5, 3), int(rng.integers(7, 13)))
    km = float(np.exp(rng.uniform(np.log(x[1]), np.log(x[-2]))))
    truth = [rng.uniform(1, 100), km]
    return _case("michaelis_menten", x, truth, rng.uniform(0.02, 0.05) * truth[0],
                 _michaelis_menten, rng)


def _growth_case(rng, name, curve):
    end = rng.uniform(10, 100)
    x = np.linspace(0, end, int(rng.integers(15, 26)))
    truth = [rng.uniform(1, 100), rng.uniform(4, 12) / end, rng.uniform(0.3, 0.7) * end]
    return _case(name, x, truth, rng.uniform(0.02, 0.04) * truth[0], curve, rng)


def _power_case(rng):
    x = np.geomspace(rng.uniform(0.1, 2), rng.uniform(5, 100), int(rng.integers(8, 16)))
    exponent = rng.choice([-1, 1]) * rng.uniform(0.3, 2.5)
    truth = [rng.uniform(0.5, 10), exponent]
    scale = np.median(np.abs(_power(x, *truth)))
    return _case("power", x, truth, rng.uniform(0.02, 0.05) * scale, _power, rng)


def _gaussian_case(rng):
    x = np.linspace(0, 10, int(rng.integers(30, 61)))
    height = rng.choice([-1, 1]) * rng.uniform(1, 10)
    truth = [rng.uniform(-2, 2), height, rng.uniform(2, 8), rng.uniform(0.3, 1.5)]
    return _case("gaussian_peak", x, truth, rng.uniform(0.02, 0.05) * abs(height), _gaussian,
                 rng)


def _biexponential_case(rng):
    end = rng.uniform(12, 48)
    x = np.unique(np.round(np.geomspace(end / 64, end, int(rng.integers(12, 19))), 6))
    k_slow = rng.uniform(1, 4) / end
    truth = [rng.uniform(2, 10), k_slow * rng.uniform(5, 20), rng.uniform(1, 5), k_slow]
    return _case("biexponential", x, truth, rng.uniform(0.01, 0.02) * (truth[0] + truth[2]),
                 _biexponential, rng)


def _weibull_case(rng):
    end = rng.uniform(5, 50)
    x = np.linspace(0, end, int(rng.integers(15, 26)))
    truth = [rng.uniform(-5, 5), rng.uniform(5, 20), rng.uniform(0.2, 0.6) * end,
             float(np.exp(rng.uniform(np.log(0.5), np.log(4))))]
    return _case("weibull", x, truth, rng.uniform(0.02, 0.04) * abs(truth[1] - truth[0]),
                 _weibull, rng)


def _case(name, x, truth, sd, curve, rng) -> Case:
    return Case(name, None, x, curve(x, *truth) + rng.normal(0, sd, x.size), np.array(truth),
                curve)


MAKERS = {
    "logistic4": lambda rng: _logistic_case(rng, False),
    "logistic5": lambda rng: _logistic_case(rng, True),
    "exponential": _exponential_case,
    "michaelis_menten": _mm_case,
    "gompertz": lambda rng: _growth_case(rng, "gompertz", _gompertz),
    "logistic_growth": lambda rng: _growth_case(rng, "logistic_growth", _logistic_growth),
    "power": _power_case,
    "gaussian_peak": _gaussian_case,
    "biexponential": _biexponential_case,
    "weibull": _weibull_case,
}


def cases(family: str, count: int, seed: int) -> list[Case]:
    """``count`` seeded series of ``family``."""
    rng = np.random.default_rng([seed, list(MAKERS).index(family)])
    return [MAKERS[family](rng) for _ in range(count)]


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
