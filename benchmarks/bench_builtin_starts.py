"""How often automatic starts reach the global least-squares optimum, per built-in family.

For each family, 1,000 seeded invented series (designs, parameter ranges and noise in
tests/core/nonlinear/builtin_simulation.py) are fitted three ways:

* the service's automatic starts (data shape + variable-projection grid search, several
  starts, best converged fit kept) - what /v1/fit solves for a built-in family;
* the reference optimum: scipy.optimize.least_squares from the true values and from
  random perturbations of them (tolerances 1e-14), or any lower run of the service;
* scipy.optimize.curve_fit from its default start (every parameter 1).

Printed per family: the share of series (with a finite optimum) at the global optimum for
the automatic starts and for curve_fit, the number of series without a finite optimum
(the lowest RSS known lies where a nonlinear parameter has run away), how many of the
automatic fits at the optimum's RSS did not pass the engine's convergence check (a flat
valley), the seconds the family took (all three fits) and the winning start strategies.
Nothing is asserted here; the test files tests/core/nonlinear/test_builtin_optimum_*.py
hold 200 series per family to 99.5%.

Run: ``.venv/bin/python benchmarks/bench_builtin_starts.py [--series 1000] [family ...]``
(a few minutes on one core).
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))
from tests.core.nonlinear.builtin_simulation import MAKERS, score  # noqa: E402

SEED = 20261204


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--series", type=int, default=1000)
    parser.add_argument("families", nargs="*", default=list(MAKERS))
    args = parser.parse_args()
    print(f"{'family':17s} {'series':>6s} {'no opt.':>7s} {'automatic':>9s} "
          f"{'(unconverged)':>13s} {'curve_fit(1,...)':>16s} {'seconds':>8s}  winning starts")
    for family in args.families:
        began = time.perf_counter()
        result = score(family, args.series, SEED)
        elapsed = time.perf_counter() - began
        ours, other = result.rates()
        wins = ", ".join(f"{k} {v}" for k, v in sorted(result.strategies.items(),
                                                       key=lambda kv: -kv[1]))
        print(f"{family:17s} {result.series:6d} {result.no_finite_optimum:7d} {ours:9.4f} "
              f"{result.not_converged:13d} {other:16.4f} {elapsed:8.1f}  {wins}", flush=True)


if __name__ == "__main__":
    main()
