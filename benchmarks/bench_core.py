"""Speed of one full series analysis, measured side by side in one run (ratios printed).

The analysis: select the degree over 1..4 (candidate table with RSS, R²,
adjusted R², AIC, BIC, PRESS, F of the last power), sequential ANOVA of the
chosen fit, diagnostics (studentized residuals, leverage, Cook's distance,
DFFITS, Shapiro-Wilk, Breusch-Pagan, Durbin-Watson) and a 200-point grid
with mean, new-observation and simultaneous bands.

* n = 100: Curvewise ``fit_series`` vs the same analysis written with the
  statsmodels formula API and with the statsmodels array API
  (targets: >= 300x and >= 40x faster).
* n = 100,000: ``fit_series`` vs ``np.polyfit`` called for the four degrees
  (coefficients only; target: >= 5x faster).

Run: ``.venv/bin/python benchmarks/bench_core.py`` (seeded data; best of interleaved rounds,
so a busy machine slows every contender alike).
"""

from __future__ import annotations

import os
import sys
import timeit
import warnings
from pathlib import Path

import numpy as np
import pandas as pd
import scipy.stats
import statsmodels.api as sm
import statsmodels.formula.api as smf
from statsmodels.stats.anova import anova_lm
from statsmodels.stats.diagnostic import het_breuschpagan
from statsmodels.stats.stattools import durbin_watson

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))
from service.core import FitOptions, GridSpec, ModelSpec, fit_series  # noqa: E402

MODEL = ModelSpec(max_degree=4, min_degree=1, select="sequential_f")
OPTIONS = FitOptions(grid=GridSpec(count=200))
FORMULAS = ["y ~ x", "y ~ x + I(x**2)", "y ~ x + I(x**2) + I(x**3)",
            "y ~ x + I(x**2) + I(x**3) + I(x**4)"]


def data(n: int, seed: int = 20261202):
    rng = np.random.default_rng(seed)
    x = np.sort(rng.uniform(0.0, 10.0, n))
    y = 1.0 + 0.8 * x - 0.05 * x**2 + rng.normal(0.0, 0.4, n)
    return x, y


def _choose(fits, alpha=0.05):
    chosen = 0
    for k in range(1, len(fits)):  # sequential F of the added power against the larger model
        f = (fits[k - 1].ssr - fits[k].ssr) / fits[k].scale
        if scipy.stats.f.sf(f, 1, fits[k].df_resid) >= alpha:
            break
        chosen = k
    return chosen


def _analyse(fits, chosen, grid_exog, level=0.95):
    table = []
    for fit in fits:
        infl = fit.get_influence()
        table.append((fit.df_resid, fit.ssr, np.sqrt(fit.scale), fit.rsquared, fit.rsquared_adj,
                      fit.aic, fit.bic, float(np.sum(infl.resid_press ** 2))))
    best = fits[chosen]
    infl = best.get_influence()
    diag = (infl.resid_studentized_internal, infl.resid_studentized_external,
            infl.hat_matrix_diag, infl.cooks_distance[0], infl.dffits[0],
            scipy.stats.shapiro(best.resid), het_breuschpagan(best.resid, best.model.exog),
            durbin_watson(best.resid))
    frame = best.get_prediction(grid_exog).summary_frame(alpha=1 - level)
    p = best.df_model + 1
    wh = np.sqrt(p * scipy.stats.f.ppf(level, p, best.df_resid))
    band = (frame["mean"] - wh * frame["mean_se"], frame["mean"] + wh * frame["mean_se"])
    return table, diag, frame, band


def statsmodels_formula(x, y):
    df = pd.DataFrame({"x": x, "y": y})
    fits = [smf.ols(f, data=df).fit() for f in FORMULAS]
    chosen = _choose(fits)
    anova = anova_lm(fits[chosen], typ=1)
    grid = pd.DataFrame({"x": np.linspace(x.min(), x.max(), 200)})
    return anova, _analyse(fits, chosen, grid)


def statsmodels_array(x, y):
    fits = [sm.OLS(y, np.vander(x, d + 1, increasing=True)).fit() for d in range(1, 5)]
    chosen = _choose(fits)
    best = fits[chosen]
    q, r = np.linalg.qr(best.model.exog)
    anova = (q.T @ y)[1:] ** 2  # sequential SS (no anova_lm for array models)
    grid = np.vander(np.linspace(x.min(), x.max(), 200), chosen + 2, increasing=True)
    return anova, _analyse(fits, chosen, grid)


def curvewise(x, y):
    return fit_series(x, y, model=MODEL, options=OPTIONS)


def polyfit4(x, y):
    return [np.polyfit(x, y, d) for d in range(1, 5)]


def best_times(funcs, *args, rounds: int = 7, burst: float = 0.15) -> list[float]:
    """Best per-call time (s) of each function, measured in interleaved rounds.

    Each round times every function for about ``burst`` seconds, one after the
    other, so a load spike on a shared machine hits all of them alike; the best
    round of each is kept.
    """
    numbers = []
    for func in funcs:
        once = timeit.timeit(lambda f=func: f(*args), number=1)
        numbers.append(max(1, int(burst / max(once, 1e-7))))
    best = [float("inf")] * len(funcs)
    for _ in range(rounds):
        for i, (func, number) in enumerate(zip(funcs, numbers, strict=True)):
            t = timeit.timeit(lambda f=func: f(*args), number=number) / number
            best[i] = min(best[i], t)
    return best


def main() -> int:
    warnings.simplefilter("ignore")
    print("load average (1, 5, 15 min): " + ", ".join(f"{v:.2f}" for v in os.getloadavg()))
    x, y = data(100)
    chosen = curvewise(x, y).selection.chosen_degree
    fits = [sm.OLS(y, np.vander(x, d + 1, increasing=True)).fit() for d in range(1, 5)]
    print(f"chosen degree (n = 100): fit_series {chosen}, statsmodels {_choose(fits) + 1}")
    t_cw, t_sf, t_sa = best_times([curvewise, statsmodels_formula, statsmodels_array], x, y)
    print(f"n = 100       fit_series {t_cw * 1e6:9.1f} us | statsmodels formula "
          f"{t_sf * 1e3:7.2f} ms ({t_sf / t_cw:6.1f}x, target 300x) | statsmodels array "
          f"{t_sa * 1e3:7.2f} ms ({t_sa / t_cw:6.1f}x, target 40x)")
    x, y = data(100_000)
    t_cw, t_pf = best_times([curvewise, polyfit4], x, y, burst=0.3)
    print(f"n = 100,000   fit_series {t_cw * 1e3:9.2f} ms | np.polyfit x4 {t_pf * 1e3:7.2f} ms "
          f"({t_pf / t_cw:6.2f}x, target 5x)")
    print("load average (1, 5, 15 min): " + ", ".join(f"{v:.2f}" for v in os.getloadavg()))
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
