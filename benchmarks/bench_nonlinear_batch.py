"""Nonlinear batch throughput: 4PL with automatic starts against a loop of scipy curve_fit.

Data (seeded, invented): 10,000 dose-response series of 24 points, 8 log-spaced
concentrations (1e-3 .. 10) x 3 replicates, falling four-parameter logistic curves with
per-series asymptotes, slope and ec50 and normal noise (sd 3 on a 100-unit span).

Measured in one run, side by side:

* the batch engine (``service.core.batch.curves.fit_many_curves``, family logistic4,
  automatic starts, summary with standard errors and residual checks), per CPU-second
  (``time.process_time``: every thread of the process counts) and wall series/s with 1
  and 2 threads;
* a Python loop of ``scipy.optimize.curve_fit`` (its defaults: Levenberg-Marquardt,
  finite-difference Jacobian, covariance) from good starts (each series' true
  parameters), estimates and covariance only, on the first ``--scipy`` series;
* the agreement of the batch with the single fit (the engine of /v1/fit) on the first
  ``--check`` series: largest relative difference of estimates and standard errors, and
  of the estimates relative to max(|estimate|, standard error) (an asymptote near 0 makes
  the plain relative difference of that estimate large while both fits sit within a few
  1e-8 standard errors of each other: both stop at a relative offset of 1e-8).

``--known-sd`` runs everything with the noise SD stated as known (weights 1/3²,
``weighting="known_sd"``; curve_fit with ``absolute_sigma``): the same least-squares
fits, standard errors not rescaled by the residual SD, the chi-square test.

``benchmarks/profile_nonlinear_kernel.py`` splits the batch's time into the kernel's stages.

Nothing is asserted (speed targets are printed, never tested). Target of issue 17: the
batch at least 50x curve_fit per CPU-second.

``--baseline DIR`` then times another checkout of the repository (e.g. ``git archive
<commit> | tar -x -C DIR``; run its benchmark once first to fill its numba cache) against
this one, alternately, ``--rounds`` times: each round starts one process per tree that
times the batch (best of ``--repeat``) and, in the same process, the curve_fit loop, and
prints both trees' series per CPU-second, their ratio, and each one's ratio to curve_fit.

Run: ``.venv/bin/python benchmarks/bench_nonlinear_batch.py [--series 10000] [--known-sd]
[--baseline DIR [--rounds 3]]``.
"""

from __future__ import annotations

import argparse
import json
import subprocess
import sys
import time
import warnings
from pathlib import Path

import numpy as np
from scipy.optimize import curve_fit

HERE = Path(__file__).resolve().parent.parent
# a worker process (``--root``) imports the service package of the tree it times
ROOT = Path(sys.argv[sys.argv.index("--root") + 1]).resolve() if "--root" in sys.argv else HERE
sys.path.insert(0, str(ROOT))
from service.core.batch.curves import fit_many_curves  # noqa: E402
from service.core.families import fit_series  # noqa: E402
from service.core.spec import FitOptions, ModelSpec  # noqa: E402

SEED = 20261205
DOSES = np.repeat(np.geomspace(1e-3, 10.0, 8), 3)
MODEL = ModelSpec(family="logistic4")
NOISE_SD = 3.0


def logistic4(x, left, right, slope, ec50):
    """The log-scale four-parameter logistic, as the family writes it."""
    return right + (left - right) / (1.0 + (x / ec50) ** slope)


def make(count: int):
    rng = np.random.default_rng(SEED)
    truth = np.column_stack([100.0 + rng.normal(0, 5, count), 5.0 + rng.normal(0, 3, count),
                             1.2 * np.exp(rng.normal(0, 0.25, count)),
                             0.1 * np.exp(rng.normal(0, 0.8, count))])
    noise = rng.normal(0, NOISE_SD, (count, DOSES.size))
    y = np.array([logistic4(DOSES, *t) for t in truth]) + noise
    return truth, y


def timed(fn):
    cpu, wall = time.process_time(), time.perf_counter()
    out = fn()
    return out, time.process_time() - cpu, time.perf_counter() - wall


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--series", type=int, default=10_000)
    parser.add_argument("--scipy", type=int, default=1_000, help="series in the curve_fit loop")
    parser.add_argument("--check", type=int, default=200, help="series checked against /v1/fit")
    parser.add_argument("--known-sd", action="store_true",
                        help="weights 1/SD² of the known noise SD, weighting known_sd")
    parser.add_argument("--baseline", type=Path, help="another checkout to time against")
    parser.add_argument("--rounds", type=int, default=3, help="alternations with --baseline")
    parser.add_argument("--repeat", type=int, default=3, help="batch runs per process (best)")
    parser.add_argument("--root", type=Path, help=argparse.SUPPRESS)   # worker: time one tree
    args = parser.parse_args()
    if args.root is not None:
        _worker(args)
        return
    known = args.known_sd
    options = FitOptions(grid=None, weighting="known_sd" if known else "relative")
    sd_kw = {"sigma": np.full(DOSES.size, NOISE_SD), "absolute_sigma": True} if known else {}
    truth, y = make(args.series)
    G = args.series
    x = np.tile(DOSES, G)
    flat, lengths = y.reshape(-1), np.full(G, DOSES.size)
    w = np.full(x.size, NOISE_SD ** -2) if known else None
    w1 = None if w is None else w[:DOSES.size]
    fit_many_curves(x[:240], flat[:240], lengths[:10], None if w is None else w[:240],
                    model=MODEL, options=options)       # load the kernels

    def batch(**kw):
        return fit_many_curves(x, flat, lengths, w, model=MODEL, options=options, **kw)
    one, cpu1, wall1 = timed(batch)
    _, cpu2, wall2 = timed(lambda: batch(workers=2))
    _, cpu_grid, _ = timed(lambda: batch(always_grid=True))

    def loop():
        with warnings.catch_warnings(), np.errstate(all="ignore"):
            warnings.simplefilter("ignore")
            for i in range(min(args.scipy, G)):
                curve_fit(logistic4, DOSES, y[i], p0=truth[i], **sd_kw)
    _, cpu_sp, _ = timed(loop)
    n_sp = min(args.scipy, G)

    worst_est = worst_se = worst_scaled = 0.0
    for i in range(min(args.check, G)):
        single = fit_series(DOSES, y[i], w1, model=MODEL, options=options)
        est = np.array([r.estimate for r in single.coefficients])
        se = np.array([r.std_error for r in single.coefficients])
        diff = np.abs(one.estimates[i] - est)
        worst_est = max(worst_est, float(np.max(diff / np.abs(est))))
        worst_scaled = max(worst_scaled, float(np.max(diff / np.maximum(np.abs(est), se))))
        worst_se = max(worst_se, float(np.max(np.abs(one.std_errors[i] - se) / se)))

    batch_rate, scipy_rate = G / cpu1, n_sp / cpu_sp
    print(f"series: {G} x {DOSES.size} points, logistic4 (log x), automatic starts, "
          f"weighting {options.weighting}")
    print(f"fitted: {one.n_ok} ok, {int(one.compiled.sum())} by the compiled engine, "
          f"{G - int(one.compiled.sum())} by the single fit")
    print(f"batch (1 thread)   : {batch_rate:10.0f} series per CPU-second "
          f"({1e6 * cpu1 / G:.1f} us each)")
    print(f"batch + grid starts: {G / cpu_grid:10.0f} series per CPU-second (always_grid)")
    print(f"curve_fit loop     : {scipy_rate:10.0f} series per CPU-second "
          f"({1e6 * cpu_sp / n_sp:.0f} us each, {n_sp} series, true values as starts)")
    print(f"ratio batch / curve_fit per CPU-second: {batch_rate / scipy_rate:.1f}x "
          "(target 50x)")
    print(f"wall: {G / wall1:.0f} series/s with 1 thread, {G / wall2:.0f} series/s with "
          f"2 threads (CPU {cpu2:.2f} s)")
    print(f"agreement with the single fit ({min(args.check, G)} series): estimates "
          f"{worst_est:.1e}, standard errors {worst_se:.1e} (largest relative difference); "
          f"estimates relative to max(|estimate|, standard error) {worst_scaled:.1e}")
    if args.baseline is not None:
        _compare(args)


def _worker(args) -> None:
    """Time the batch of this process's tree (best of ``--repeat``) and the curve_fit loop;
    print them as one JSON line."""
    known = args.known_sd
    options = FitOptions(grid=None, weighting="known_sd" if known else "relative")
    sd_kw = {"sigma": np.full(DOSES.size, NOISE_SD), "absolute_sigma": True} if known else {}
    truth, y = make(args.series)
    G = args.series
    x, flat, lengths = np.tile(DOSES, G), y.reshape(-1), np.full(G, DOSES.size)
    w = np.full(x.size, NOISE_SD ** -2) if known else None
    fit_many_curves(x[:240], flat[:240], lengths[:10], None if w is None else w[:240],
                    model=MODEL, options=options)
    cpu = min(timed(lambda: fit_many_curves(x, flat, lengths, w, model=MODEL,
                                            options=options))[1] for _ in range(args.repeat))
    n_sp = min(args.scipy, G)

    def loop():
        with warnings.catch_warnings(), np.errstate(all="ignore"):
            warnings.simplefilter("ignore")
            for i in range(n_sp):
                curve_fit(logistic4, DOSES, y[i], p0=truth[i], **sd_kw)
    print(json.dumps({"batch_cpu": cpu, "series": G, "scipy_cpu": timed(loop)[1],
                      "scipy_series": n_sp}))


def _compare(args) -> None:
    """``--rounds`` alternations of a worker process on the baseline and on this tree."""
    trees = (("baseline", args.baseline.resolve()), ("this tree", HERE))
    rates = {name: [] for name, _ in trees}
    print(f"alternating runs, {args.series} series, best of {args.repeat} batch runs per "
          f"process; baseline {trees[0][1]}")
    for r in range(args.rounds):
        for name, root in trees:
            cmd = [sys.executable, str(Path(__file__).resolve()), "--root", str(root),
                   "--series", str(args.series), "--scipy", str(args.scipy),
                   "--repeat", str(args.repeat)] + (["--known-sd"] if args.known_sd else [])
            out = json.loads(subprocess.run(cmd, check=True, capture_output=True,
                                            text=True).stdout.strip().splitlines()[-1])
            batch = out["series"] / out["batch_cpu"]
            scipy = out["scipy_series"] / out["scipy_cpu"]
            rates[name].append(batch)
            print(f"  round {r + 1} {name:9s}: {batch:8.0f} series per CPU-second "
                  f"({1e6 / batch:.2f} us each); curve_fit {scipy:5.0f} per CPU-second; "
                  f"ratio {batch / scipy:.1f}x")
    ratios = [new / old for new, old in zip(rates["this tree"], rates["baseline"], strict=True)]
    print(f"this tree / baseline per CPU-second, by round: "
          f"{', '.join(f'{q:.3f}' for q in ratios)}")


if __name__ == "__main__":
    main()
