"""How often a comparison of candidates picks the family the data came from (seeded
simulation, bounded; the rates are printed).

* On four-parameter-logistic data, the extra-sum-of-squares F test prefers the
  five-parameter logistic no more often than its alpha allows: the count must stay
  under the 99.9% quantile of Binomial(N, alpha) (scipy.stats.binom), the usual
  binomial check of a test's size.
* On five-parameter data with clear asymmetry, the F test finds the 5PL at a rate
  reported here and required to be at least 80%.
* By AICc, among saturation curves (Michaelis-Menten, exponential rise, power law),
  the true family is chosen at a rate reported here and required to be at least 80%.
Designs: an invented assay plate (8 doses in three-fold steps, triplicates) and an
invented enzyme run (8 substrate levels, duplicates); invented data only exercise the
rule, whose reference is the binomial bound above.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

from service.core import ModelSpec
from service.core.compare import compare

ALPHA = 0.05
DOSES = np.repeat(0.1 * 3.0 ** np.arange(8), 3)
SUBSTRATE = np.repeat(0.25 * 2.0 ** np.arange(8), 2)


def _five_pl(x, low, high, ec50, slope, asym):
    return high + (low - high) / (1 + (2 ** (1 / asym) - 1) * (x / ec50) ** slope) ** asym


def _choices(make_y, candidates, select, n, seed):
    rng = np.random.default_rng(seed)
    picked = []
    for _ in range(n):
        y = make_y(rng)
        result = compare(make_y.x, y, candidates=candidates, select=select, alpha=ALPHA)
        picked.append(result.candidates[result.chosen].family)
    return picked


class _Series:
    def __init__(self, x, curve, sd):
        self.x, self.curve, self.sd = x, curve, sd

    def __call__(self, rng):
        return self.curve(self.x) + rng.normal(0.0, self.sd, self.x.size)


LOGISTICS = (ModelSpec(family="logistic4"), ModelSpec(family="logistic5"))


@pytest.mark.slow
def test_f_test_keeps_its_size_on_four_parameter_data():
    n = 200
    series = _Series(DOSES, lambda x: _five_pl(x, 0.05, 2.4, 5.0, 1.2, 1.0), 0.04)
    picked = _choices(series, LOGISTICS, "f_test", n, seed=41)
    wrong = picked.count("logistic5")
    bound = stats.binom.ppf(0.999, n, ALPHA)
    print(f"\n4PL data, F test at alpha {ALPHA}: 5PL chosen {wrong}/{n} "
          f"({wrong / n:.3f}; binomial 99.9% bound {bound:.0f})")
    assert wrong <= bound


@pytest.mark.slow
def test_f_test_finds_clear_asymmetry():
    n = 100
    series = _Series(DOSES, lambda x: _five_pl(x, 0.05, 2.4, 5.0, 1.5, 0.25), 0.03)
    picked = _choices(series, LOGISTICS, "f_test", n, seed=42)
    rate = picked.count("logistic5") / n
    print(f"\n5PL data (asymmetry 0.25), F test: 5PL chosen {rate:.3f}")
    assert rate >= 0.8


@pytest.mark.slow
def test_aicc_picks_the_true_saturation_curve():
    candidates = (ModelSpec(family="michaelis_menten"), ModelSpec(family="exponential"),
                  ModelSpec(family="power"))
    truths = {"michaelis_menten": lambda x: 12 * x / (2.5 + x),
              "exponential": lambda x: 11 * (1 - np.exp(-0.35 * x)),
              "power": lambda x: 2.5 * x ** 0.45}
    n = 60
    for seed, (name, curve) in enumerate(truths.items(), start=43):
        picked = _choices(_Series(SUBSTRATE, curve, 0.25), candidates, "aicc", n, seed)
        rate = picked.count(name) / n
        print(f"\n{name} data, AICc: true family chosen {rate:.3f} "
              f"({', '.join(f'{f} {picked.count(f)}' for f in sorted(set(picked)))})")
        assert rate >= 0.8, (name, picked)
