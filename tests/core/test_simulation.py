"""Seeded Monte Carlo checks of the bands and of the sequential F rule.

Sources: the nominal coverage of t-based confidence and prediction intervals and
of the Working-Hotelling band, and the size alpha of the partial F test under
the null, are textbook properties of the normal linear model (common practice;
e.g. Kutner et al., Applied Linear Statistical Models, ch. 2 and 7). Tolerances:
issue 2 asks for 95% +/- 1.5% coverage; with 2000 replicates one binomial SE is
0.49%.
"""

from __future__ import annotations

import numpy as np

from service.core import FitOptions, GridSpec, ModelSpec, fit_series

X = np.linspace(0.0, 10.0, 25)
X0 = (0.5, 3.0, 5.0, 9.5)  # where bands are checked (two near the ends)


def _truth(x):
    return 1.0 + 0.6 * x - 0.04 * x * x


def test_band_coverage_is_nominal():
    rng = np.random.default_rng(20261202)
    reps, sd = 2000, 0.7
    opts = FitOptions(level=0.95, grid=GridSpec(x=X0), include=frozenset({"grid"}))
    dense = np.linspace(0.0, 10.0, 41)
    band_opts = FitOptions(level=0.95, grid=GridSpec(x=tuple(dense)), include=frozenset({"grid"}))
    mean_hits = obs_hits = whole_curve = 0
    x0 = np.asarray(X0)
    for r in range(reps):
        y = _truth(X) + rng.normal(0, sd, X.size)
        g = fit_series(X, y, model=ModelSpec(degree=2), options=opts).grid
        new = _truth(x0) + rng.normal(0, sd, x0.size)
        mean_hits += np.sum((g.mean_lower <= _truth(x0)) & (_truth(x0) <= g.mean_upper))
        obs_hits += np.sum((g.obs_lower <= new) & (new <= g.obs_upper))
        if r < 500:  # simultaneous band: the whole true curve inside
            b = fit_series(X, y, model=ModelSpec(degree=2), options=band_opts).grid
            whole_curve += bool(np.all((b.band_lower <= _truth(dense)) &
                                       (_truth(dense) <= b.band_upper)))
    mean_cov = mean_hits / (reps * x0.size)
    obs_cov = obs_hits / (reps * x0.size)
    print(f"coverage: mean {mean_cov:.4f}, new observation {obs_cov:.4f}, "
          f"simultaneous (41-point curve, 500 reps) {whole_curve / 500:.3f}")
    assert abs(mean_cov - 0.95) <= 0.015
    assert abs(obs_cov - 0.95) <= 0.015
    # Working-Hotelling covers the whole curve with probability >= 95% (conservative on a
    # finite grid); 500 reps: SE ~1%
    assert whole_curve / 500 >= 0.95 - 0.03


def test_sequential_f_false_upgrade_rate_matches_alpha():
    rng = np.random.default_rng(7)
    reps, alpha = 1000, 0.05
    model = ModelSpec(max_degree=4, min_degree=1, select="sequential_f", alpha=alpha)
    opts = FitOptions(include=frozenset({"selection"}))
    chosen = np.empty(reps, dtype=int)
    for r in range(reps):
        y = _truth(X) - 0.02 * X * X + rng.normal(0, 0.3, X.size)  # clearly quadratic
        chosen[r] = fit_series(X, y, model=model, options=opts).selection.chosen_degree
    over = float(np.mean(chosen > 2))
    print(f"sequential_f: degree > 2 chosen in {over:.3f} of {reps} (alpha {alpha})")
    assert np.all(chosen >= 2)  # the true x^2 is always found at this signal strength
    # under the null the x^3 partial F test has size alpha exactly; 1000 reps: SE 0.0069,
    # accept within ~3.3 SE
    assert abs(over - alpha) <= 0.023
