"""Speed of one full nonlinear analysis, measured side by side in one run (ratio printed).

The analysis, for a four-parameter logistic at n = 24 (8 doses in triplicate,
seeded demo data): least-squares fit from given start values, standard
errors, t tests and Wald limits, profile-likelihood limits of all four
parameters, a 200-point grid with delta-method bands for the mean and for
a new observation, and the residual diagnostics (studentized residuals,
leverage, Cook's distance, Shapiro-Wilk, Breusch-Pagan, Durbin-Watson).

* Curvewise: ``service.core.fit_series`` with the ``expression`` family (the
  equation as text, parsed and differentiated by the service) - what
  ``/v1/fit`` runs. A second line times the engine alone (``solve`` + ``infer``
  + ``profile_limits`` + ``predict`` with a hand-written model class).
* A hand-written scipy script doing the same: ``curve_fit`` with its default
  finite-difference Jacobian, delta-method bands with numpy (forward-difference
  gradients), and profile limits by refitting the other three parameters with
  ``curve_fit`` at fixed values, stepping out one standard error at a time until
  the profile t passes the critical value, then ``brentq`` (to 1e-9 standard
  errors, the engine's default); the diagnostics with numpy and scipy.stats
  (``shapiro``, Breusch-Pagan as n R² of e² on x with ``chi2.sf``, Durbin-Watson).

Target: Curvewise >= 3x faster. Run: ``.venv/bin/python benchmarks/bench_nonlinear.py``
(best of interleaved rounds, so a busy machine slows both contenders alike).
"""

from __future__ import annotations

import os
import sys
import timeit
import warnings
from pathlib import Path

import numpy as np
from scipy import stats
from scipy.optimize import brentq, curve_fit

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))
from service.core import FitOptions, GridSpec, ModelSpec, fit_series  # noqa: E402
from service.core.nonlinear.bands import predict  # noqa: E402
from service.core.nonlinear.inference import infer  # noqa: E402
from service.core.nonlinear.profile import profile_limits  # noqa: E402
from service.core.nonlinear.solver import solve  # noqa: E402
from tests.core.nonlinear.models import Logistic4  # noqa: E402  (the tests' exact model)

START = np.array([0.0, 1.0, 3.0, 1.5])
LEVEL = 0.95


def data(seed: int = 20261204):
    rng = np.random.default_rng(seed)
    x = np.repeat(np.geomspace(0.1, 100.0, 8), 3)
    y = Logistic4().values(x, np.array([0.1, 1.2, 5.0, 2.0])) + rng.normal(0.0, 0.08, x.size)
    return x, y


MODEL = ModelSpec(family="expression", expression="d + (a - d)/(1 + (x/c)^b)",
                  parameters=tuple(zip(("a", "b", "c", "d"), START.tolist(), strict=True)))
OPTIONS = FitOptions(level=LEVEL, grid=GridSpec(count=200))


def curvewise(x, y):
    return fit_series(x, y, model=MODEL, options=OPTIONS)


def engine(x, y):
    sol = solve(Logistic4(), x, y, START)
    inf = infer(sol, level=LEVEL)
    limits = profile_limits(sol, level=LEVEL)
    bands = predict(sol, np.geomspace(x.min(), x.max(), 200), level=LEVEL, inference=inf)
    return sol, inf, limits, bands


def logistic(x, a, b, c, d):
    return d + (a - d) / (1.0 + (x / c) ** b)


def scipy_script(x, y):
    popt, pcov = curve_fit(logistic, x, y, p0=START)
    n, p = x.size, popt.size
    df = n - p
    resid = y - logistic(x, *popt)
    rss = float(resid @ resid)
    s = np.sqrt(rss / df)
    se = np.sqrt(np.diag(pcov))
    t = popt / se
    pvalues = 2 * stats.t.sf(np.abs(t), df)
    crit = stats.t.ppf(0.5 + LEVEL / 2, df)
    wald = np.column_stack([popt - crit * se, popt + crit * se])

    def tau(j, b):
        def fixed(xx, *others):
            return logistic(xx, *np.insert(others, j, b))

        others, _ = curve_fit(fixed, x, y, p0=np.delete(popt, j))
        r = y - fixed(x, *others)
        return np.sign(b - popt[j]) * np.sqrt(max(float(r @ r) - rss, 0.0)) / s

    limits = np.full((p, 2), np.nan)
    for j in range(p):
        for k, side in enumerate((-1.0, 1.0)):
            inside, outside = popt[j], popt[j] + side * se[j]
            while abs(tau(j, outside)) < crit and abs(outside - popt[j]) < 30 * se[j]:
                inside, outside = outside, outside + side * se[j]
            limits[j, k] = brentq(lambda b, j=j, side=side: tau(j, b) - side * crit,
                                  min(inside, outside), max(inside, outside), xtol=1e-9 * se[j])
    grid = np.geomspace(x.min(), x.max(), 200)
    fit = logistic(grid, *popt)
    steps = np.sqrt(np.finfo(float).eps) * np.maximum(np.abs(popt), 1.0)
    grad = np.column_stack([(logistic(grid, *(popt + h * e)) - fit) / h
                            for h, e in zip(steps, np.eye(p), strict=True)])
    se_fit = np.sqrt(np.einsum("ij,jk,ik->i", grad, pcov, grad))
    se_obs = np.sqrt(se_fit ** 2 + s ** 2)
    bands = (fit - crit * se_fit, fit + crit * se_fit, fit - crit * se_obs, fit + crit * se_obs)
    return popt, se, t, pvalues, wald, limits, bands, diagnostics(x, resid, popt, s, p)


def diagnostics(x, resid, popt, s, p):
    """Tangent-plane leverage, studentized residuals, Cook's distance and three tests."""
    n = x.size
    steps = np.sqrt(np.finfo(float).eps) * np.maximum(np.abs(popt), 1.0)
    base = logistic(x, *popt)
    jac = np.column_stack([(logistic(x, *(popt + h * e)) - base) / h
                           for h, e in zip(steps, np.eye(p), strict=True)])
    q, _ = np.linalg.qr(jac)
    h = np.sum(q * q, axis=1)
    std = resid / (s * np.sqrt(1 - h))
    s_i = np.sqrt((resid @ resid - resid ** 2 / (1 - h)) / (n - p - 1))
    stud = resid / (s_i * np.sqrt(1 - h))
    cook = std ** 2 * h / (p * (1 - h))
    sw = stats.shapiro(resid)
    e2 = resid ** 2
    design = np.column_stack([np.ones(n), x])
    fitted = design @ np.linalg.lstsq(design, e2, rcond=None)[0]
    r2 = 1 - np.sum((e2 - fitted) ** 2) / np.sum((e2 - e2.mean()) ** 2)
    bp = (n * r2, stats.chi2.sf(n * r2, 1))
    dw = np.sum(np.diff(resid) ** 2) / (resid @ resid)
    return stud, cook, sw, bp, dw


def best_times(funcs, *args, rounds: int = 7, burst: float = 0.3) -> list[float]:
    """Best per-call time (s) of each function over interleaved rounds of about ``burst`` s."""
    numbers = []
    for func in funcs:
        once = timeit.timeit(lambda f=func: f(*args), number=1)
        numbers.append(max(1, int(burst / max(once, 1e-7))))
    best = [float("inf")] * len(funcs)
    for _ in range(rounds):
        for i, (func, number) in enumerate(zip(funcs, numbers, strict=True)):
            best[i] = min(best[i], timeit.timeit(lambda f=func: f(*args), number=number) / number)
    return best


def main() -> int:
    warnings.simplefilter("ignore")
    print("load average (1, 5, 15 min): " + ", ".join(f"{v:.2f}" for v in os.getloadavg()))
    x, y = data()
    report, theirs = curvewise(x, y), scipy_script(x, y)
    est = np.array([c.estimate for c in report.coefficients])
    ours_limits = np.array([[c.profile_lower, c.profile_upper] for c in report.coefficients])
    print(f"agreement: estimates {np.max(np.abs(est / theirs[0] - 1)):.1e} (curve_fit stops at "
          f"its default tolerances), profile limits "
          f"{np.max(np.abs(ours_limits / theirs[5] - 1)):.1e} (max relative difference)")
    t_cw, t_engine, t_sp = best_times([curvewise, engine, scipy_script], x, y)
    sol = engine(x, y)[0]
    t_solve, t_profile = best_times(
        [lambda: solve(Logistic4(), x, y, START), lambda: profile_limits(sol)])
    print(f"4PL, n = 24, full analysis: Curvewise expression family {t_cw * 1e3:7.2f} ms | "
          f"scipy script {t_sp * 1e3:8.2f} ms | ratio {t_sp / t_cw:6.1f}x (target 3x)")
    print(f"  engine alone (hand-written model, no diagnostics) {t_engine * 1e3:.2f} ms: "
          f"solve {t_solve * 1e3:.2f} ms, profile limits {t_profile * 1e3:.2f} ms")
    print("load average (1, 5, 15 min): " + ", ".join(f"{v:.2f}" for v in os.getloadavg()))
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
