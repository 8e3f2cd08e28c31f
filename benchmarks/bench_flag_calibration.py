"""Calibration of the trust flags: how often each caution/serious flag fires, on clean and on
faulty series (seeded simulation; rates printed, nothing timed).

Every series is invented: the quadratic ``1 + 2x - 1.5x²`` plus independent normal
noise of SD ``SIGMA`` (clean), or with one stated fault, fitted as a fixed quadratic by
``fit_series`` (``include`` empty: the flags do not depend on it).

* Clean designs, x in [0, 1]: ``even`` (evenly spaced), ``random`` (uniform, in
  random order), ``clustered`` (three tight clusters at 0, 0.35 and 1, sorted),
  ``far point`` (uniform plus one x at 3: a high-leverage design), ``replicated``
  (n/4 levels x 4: the lack-of-fit test applies); n from 8 to 200; plus a straight
  line and a cubic fitted to their own clean truths. A flag's false-positive rate
  must stay within the binomial upper bound of its nominal level: each test at
  ``TEST_ALPHA`` (0.01), any test-based flag at ``FAMILY_ALPHA`` (0.05); facts
  (exact fit, no residual df, ill-conditioned design, extrapolation) never fire here.
* Faults (effect sizes in units of SIGMA, chosen by us; the matching flag in brackets):
  a spike of 6 SD at one random point [outliers]; a cubic term ``5 SD (2x - 1)³`` on
  the replicated design [lack_of_fit]; SD growing as ``exp(3x)`` (a 20-fold range,
  RMS SIGMA) [non_constant_variance]; AR(1) errors with rho 0.6 [serial_correlation];
  a step of 4 SD at x = 0.5 in sorted x [serial_correlation]; centred exponential
  (skewed) errors [non_normal_residuals]. Reported without a target: SD growing
  linearly from 0 (a weaker pattern for Koenker's test) and the step on the replicated
  design [lack_of_fit].

``tests/core/test_flag_calibration.py`` asserts the bounds and the power at n = 50
with these same scenarios.

Run: ``.venv/bin/python benchmarks/bench_flag_calibration.py [--reps 2000]``.
"""

from __future__ import annotations

import argparse
import sys
import time
import zlib
from pathlib import Path

import numpy as np
from scipy import stats

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))
from service.core import FitOptions, ModelSpec, fit_series  # noqa: E402
from service.core.checks.flags import FAMILY_ALPHA, TEST_ALPHA  # noqa: E402

SIGMA = 0.3
OPTIONS = FitOptions(grid=None, include=frozenset())
TESTED = ("lack_of_fit", "non_normal_residuals", "non_constant_variance", "serial_correlation",
          "outliers", "influential_points", "high_leverage")
FACTS = ("exact_fit", "no_residual_df", "ill_conditioned_design", "extrapolation")
COLUMNS = (*TESTED, "facts", "any")
SHORT = {"lack_of_fit": "lof", "non_normal_residuals": "normal", "non_constant_variance": "var",
         "serial_correlation": "serial", "outliers": "outlier", "influential_points": "influ",
         "high_leverage": "lever", "facts": "facts", "any": "ANY"}
CLEAN_N = (8, 12, 20, 50, 100, 200)
FAULT_N = (20, 50, 100, 200)
BOUND_LEVEL = 1e-4   # one-sided level of each binomial bound (hundreds of cells x flags)


def _truth(x, degree=2):
    return {1: 1.0 + 2.0 * x, 2: 1.0 + 2.0 * x - 1.5 * x * x,
            3: 1.0 + 2.0 * x - 1.5 * x * x + 0.8 * x ** 3}[degree]


def _even(rng, n):
    return np.linspace(0.0, 1.0, n)


def _random(rng, n):
    return rng.uniform(0.0, 1.0, n)


def _clustered(rng, n):
    centre = rng.choice([0.0, 0.35, 1.0], size=n, p=[0.5, 0.3, 0.2])
    centre[:3] = (0.0, 0.35, 1.0)
    return np.sort(centre + rng.normal(0.0, 0.02, n))


def _far_point(rng, n):
    return np.r_[rng.uniform(0.0, 1.0, n - 1), 3.0]


def _replicated(rng, n):
    reps = 2 if n < 16 else 4
    return np.repeat(np.linspace(0.0, 1.0, n // reps), reps)


def _fives(rng, n):
    return np.repeat(np.linspace(0.0, 1.0, n // 5), 5)


DESIGNS = {"even": _even, "random": _random, "clustered": _clustered, "far point": _far_point,
           "replicated": _replicated}


def _noise(rng, x):
    return rng.normal(0.0, SIGMA, x.size)


def _ar1(rng, x, rho=0.6):
    e = rng.normal(0.0, 1.0, x.size)
    e[0] /= np.sqrt(1.0 - rho * rho)    # stationary start
    for i in range(1, x.size):
        e[i] += rho * e[i - 1]
    return SIGMA * np.sqrt(1.0 - rho * rho) * e


def _spike(rng, x):
    y = _truth(x) + _noise(rng, x)
    y[rng.integers(x.size)] += 6.0 * SIGMA
    return y


def _scaled(sd, rng, x):
    return _truth(x) + SIGMA * sd / np.sqrt(np.mean(sd * sd)) * rng.normal(0.0, 1.0, x.size)


# name -> (design, matching flag or None, y generator)
FAULTS = {
    "spike 6 SD": (_even, "outliers", _spike),
    "cubic 5 SD (replicated x)": (_fives, "lack_of_fit",
                                  lambda rng, x: _truth(x) + 5.0 * SIGMA * (2.0 * x - 1.0) ** 3
                                  + _noise(rng, x)),
    "SD ~ exp(3x)": (_even, "non_constant_variance",
                     lambda rng, x: _scaled(np.exp(3.0 * x), rng, x)),
    "AR(1) rho 0.6": (_even, "serial_correlation", lambda rng, x: _truth(x) + _ar1(rng, x)),
    "step 4 SD (sorted x)": (_even, "serial_correlation",
                             lambda rng, x: _truth(x) + 4.0 * SIGMA * (x > 0.5) + _noise(rng, x)),
    "skewed errors": (_even, "non_normal_residuals",
                      lambda rng, x: _truth(x) + SIGMA * (rng.exponential(1.0, x.size) - 1.0)),
    "SD ~ x (from 0)": (_even, None, lambda rng, x: _scaled(x, rng, x)),
    "step 4 SD (replicated x)": (_fives, None, lambda rng, x: _truth(x) + 4.0 * SIGMA * (x > 0.5)
                                 + _noise(rng, x)),
}


def clean_cells():
    """(label, design, n, degree) of every clean cell."""
    cells = [(f"{name:10s} n={n:<4d} quadratic", name, n, 2) for name in DESIGNS
             for n in CLEAN_N]
    cells += [("even       n=50   line", "even", 50, 1), ("random     n=50   cubic", "random",
                                                           50, 3)]
    return cells


def _seed(label: str, seed: int) -> np.random.Generator:
    return np.random.default_rng([seed, zlib.crc32(label.encode())])


def firing_rates(xs_ys, degree: int = 2) -> dict[str, float]:
    """Share of the series whose fit gets each caution/serious flag (and facts, any)."""
    model = ModelSpec(degree=degree)
    counts = dict.fromkeys(COLUMNS, 0)
    total = 0
    for x, y in xs_ys:
        fired = {f.code for f in fit_series(x, y, model=model, options=OPTIONS).flags
                 if f.severity != "info"}
        for code in TESTED:
            counts[code] += code in fired
        counts["facts"] += bool(fired & set(FACTS))
        counts["any"] += bool(fired)
        total += 1
    return {k: v / total for k, v in counts.items()}


def clean_rates(design: str, n: int, degree: int, reps: int, seed: int) -> dict[str, float]:
    rng = _seed(f"clean {design} {n} {degree}", seed)

    def series():
        for _ in range(reps):
            x = DESIGNS[design](rng, n)
            yield x, _truth(x, degree) + _noise(rng, x)
    return firing_rates(series(), degree)


def fault_rates(fault: str, n: int, reps: int, seed: int) -> dict[str, float]:
    design, _, make_y = FAULTS[fault]
    rng = _seed(f"fault {fault} {n}", seed)

    def series():
        for _ in range(reps):
            x = design(rng, n)
            yield x, make_y(rng, x)
    return firing_rates(series())


def upper_bound(reps: int, level: float) -> float:
    """Largest firing rate consistent with a true rate ``level`` (binomial, one-sided)."""
    return float(stats.binom.isf(BOUND_LEVEL, reps, level)) / reps


def _row(label: str, rates: dict, mark: str | None = None) -> str:
    cells = []
    for col in COLUMNS:
        text = f"{rates[col]:.3f}"
        cells.append(f"{'*' + text if col == mark else text:>8s}")
    return f"{label:32s}" + "".join(cells)


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--reps", type=int, default=2000, help="series per cell")
    parser.add_argument("--seed", type=int, default=20261204)
    args = parser.parse_args()
    start = time.perf_counter()
    header = f"{'scenario':32s}" + "".join(f"{SHORT[c]:>8s}" for c in COLUMNS)
    test_bound, any_bound = upper_bound(args.reps, TEST_ALPHA), upper_bound(args.reps,
                                                                            FAMILY_ALPHA)
    print(f"Clean series ({args.reps} per row): firing rate of each caution/serious flag.")
    print(f"Nominal: each test {TEST_ALPHA} (bound {test_bound:.3f}), any test-based flag "
          f"{FAMILY_ALPHA} (bound {any_bound:.3f}), facts 0; bounds are binomial upper "
          f"quantiles at {BOUND_LEVEL:g}.")
    print(header)
    worst = 0.0
    for label, design, n, degree in clean_cells():
        rates = clean_rates(design, n, degree, args.reps, args.seed)
        over = [c for c in TESTED if rates[c] > test_bound]
        over += ["any"] * (rates["any"] > any_bound) + ["facts"] * (rates["facts"] > 0)
        worst = max(worst, max(rates[c] for c in TESTED))
        print(_row(label, rates) + ("   OVER: " + ", ".join(over) if over else ""))
    print(f"largest single-flag rate on clean series: {worst:.3f}")
    print()
    print(f"Faulty series ({args.reps} per row): * marks the matching flag.")
    print(header)
    for fault, (_, match, _) in FAULTS.items():
        for n in FAULT_N:
            print(_row(f"{fault} n={n}", fault_rates(fault, n, args.reps, args.seed), match))
    print(f"\n{time.perf_counter() - start:.0f} s")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
