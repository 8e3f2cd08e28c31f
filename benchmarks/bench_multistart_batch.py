"""logistic5 and biexponential batches: the compiled multi-start engine against the single fit.

Data (seeded, invented: the generators of tests/batch/curves_data.py):

* ``logistic5``: falling asymmetric dose-response curves on log x, 13 concentrations
  (1e-4 .. 100) x 2 replicates, y_left ~100, y_right ~5, ec50 ~0.1, asymmetry ~0.5, sd 1;
* ``logistic5_linear``: rising asymmetric curves on linear x, 16 x 2 points, sd 0.3;
* ``biexponential``: two-phase decays (8 at rate ~1, 4 at rate ~0.1), 14 times
  (0.25 .. 24) x 2 replicates, sd 0.1.

Measured in one run, old and new alternating (``--rounds`` each, the median printed), per
CPU-second (``time.process_time``): the batch engine as it is
(``service.core.batch.curves.fit_many_curves``, summary) and the same call with the compiled
engine switched off (``compiled_family`` -> None: every series through the single fit, the
path these families took before), on the first ``--single`` series. Also printed: the share
of series the compiled engine hands to the single fit, the share it keeps after re-solving
the starts its solver could not finish with the single fit's solver
(``curves_resolve.settle``), and the agreement with the single fit
on the first ``--check`` series (estimates relative to max(|estimate|, standard error), and
plainly relative; standard errors relative).

Nothing is asserted (speed is printed, never tested).

Run: ``.venv/bin/python benchmarks/bench_multistart_batch.py [--series 2000] [--single 100]``.
"""

from __future__ import annotations

import argparse
import statistics
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))
from service.core.batch import curves  # noqa: E402
from service.core.families import fit_series  # noqa: E402
from service.core.spec import FitOptions, ModelSpec  # noqa: E402
from tests.batch import curves_data as data  # noqa: E402

SEED = 20261205


CASES = {"logistic5": (ModelSpec(family="logistic5"), data.logistic5),
         "logistic5_linear": (ModelSpec(family="logistic5", scale="linear"),
                              data.logistic5_linear),
         "biexponential": (ModelSpec(family="biexponential"), data.biexponential)}


def flat(series):
    return (np.concatenate([s[0] for s in series]), np.concatenate([s[1] for s in series]),
            np.array([s[0].size for s in series]))


def cpu(fn):
    start = time.process_time()
    out = fn()
    return time.process_time() - start, out


def run(name: str, args) -> None:
    model, make = CASES[name]
    series = make(np.random.default_rng(SEED), args.series)
    x, y, lengths = flat(series)
    xs, ys, ls = flat(series[:args.single])
    real, settle, settled = curves.compiled_family, curves.settle, []

    def counted(*a):
        out = settle(*a)
        settled.append(int(out[0].sum()))
        return out
    curves.fit_many_curves(xs[:lengths[:2].sum()], ys[:lengths[:2].sum()], lengths[:2],
                           model=model)                 # compile / load the kernels first
    new_times, old_times, batch = [], [], None
    for _ in range(args.rounds):
        settled.clear()
        curves.settle = counted
        try:
            t, batch = cpu(lambda: curves.fit_many_curves(x, y, lengths, model=model))
        finally:
            curves.settle = settle
        new_times.append(t / args.series)
        curves.compiled_family = lambda *a, **k: None
        try:
            t, _ = cpu(lambda: curves.fit_many_curves(xs, ys, ls, model=model))
        finally:
            curves.compiled_family = real
        old_times.append(t / args.single)
    new, old = statistics.median(new_times), statistics.median(old_times)
    handed = 1.0 - batch.compiled.mean()
    worst_scaled = worst_plain = worst_se = 0.0
    for i, (sx, sy) in enumerate(series[:args.check]):
        ref = fit_series(sx, sy, model=model, options=FitOptions(grid=None))
        est = np.array([c.estimate for c in ref.coefficients])
        se = np.array([c.std_error for c in ref.coefficients])
        diff = np.abs(batch.estimates[i] - est)
        worst_scaled = max(worst_scaled, float(np.max(diff / np.maximum(np.abs(est), se))))
        worst_plain = max(worst_plain, float(np.max(diff / np.abs(est))))
        worst_se = max(worst_se, float(np.max(np.abs(batch.std_errors[i] - se) / se)))
    print(f"{name:17s} batch {1 / new:8.0f} series/CPU-s | single fit {1 / old:6.1f} "
          f"series/CPU-s | ratio {old / new:6.1f}x | handed to the single fit "
          f"{handed:5.1%} | kept after re-solving starts {sum(settled) / args.series:5.1%} | "
          f"agreement on {args.check}: estimates {worst_scaled:.1e} "
          f"(of max(|est|, se); plain {worst_plain:.1e}), SEs {worst_se:.1e}")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--series", type=int, default=2_000)
    parser.add_argument("--single", type=int, default=100,
                        help="series through the single fit per round")
    parser.add_argument("--check", type=int, default=100, help="series checked against /v1/fit")
    parser.add_argument("--rounds", type=int, default=2)
    parser.add_argument("--family", choices=sorted(CASES), action="append")
    args = parser.parse_args()
    for name in args.family or list(CASES):
        run(name, args)


if __name__ == "__main__":
    main()
