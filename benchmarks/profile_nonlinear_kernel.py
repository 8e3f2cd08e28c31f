"""Per-stage cost of the nonlinear batch kernel on the 4PL benchmark's data.

The kernel's own source (``curves_kernel.fit_rows``) is compiled again with a ``stop``
argument: stage k ends every series after its k-th step (``continue``). The cost of a
stage is the CPU time of stopping after it minus that of stopping before it (best of
``--repeat`` runs of ``time.process_time``, all series of ``bench_nonlinear_batch``'s data).
Nothing else of the kernel is changed, so the stages sum to the whole kernel; the
Python around it (screening, finishing the columns) is timed separately.

Run: ``.venv/bin/python benchmarks/profile_nonlinear_kernel.py [--series 10000]``.
"""

from __future__ import annotations

import argparse
import inspect
import sys
import textwrap
import time
from pathlib import Path

import numba
import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))
sys.path.insert(0, str(Path(__file__).resolve().parent))
from bench_nonlinear_batch import DOSES, MODEL, make  # noqa: E402

from service.core.batch import curves, curves_kernel  # noqa: E402
from service.core.batch.curves import fit_many_curves  # noqa: E402

# (text the stop goes before, name of the stage that ends there); shape_start is split
# from its solve by the replacement below
STAGES = (("        order, which = order_all[:n]", "read: ln x, sqrt w"),
          ("        k, ss_pure = pool(", "sort by x"),
          ("        pooled = (ul_all", "levels, pooling"),
          ("        if shape_ok:", "shape start"),
          ("        if (always_grid or not found)", "solve from the shape start"),
          ("        if not found:", "grid start (when needed)"),
          ("        if code > SMALL_GRADIENT", "orientation, re-solve"),
          ("        row = stats[r]", "curve and Jacobian at the estimates"),
          ("        if not math.isfinite(row[_BP])", "inference and residual checks"),
          (None, "lack of fit, TSS, store"))


def staged_kernel():
    """``fit_rows`` with a leading ``stop`` argument (compiled here, not cached)."""
    src = textwrap.dedent(inspect.getsource(curves_kernel.fit_rows.py_func))
    src = src.split("\n", 1)[1]                                 # drop the decorator
    src = src.replace("def fit_rows(fid,", "def fit_rows_staged(stop, fid,", 1)
    shape = "        if shape_start(fid, xs, u, ys, lev, means, m, nl, v[:n]):"
    assert shape in src
    src = src.replace(shape, "        shape_ok = shape_start(fid, xs, u, ys, lev, means, m, nl, "
                      "v[:n])\n        if shape_ok:", 1)
    for k, (anchor, _) in enumerate(STAGES[:-1]):
        assert src.count(anchor) == 1, anchor
        src = src.replace(anchor, f"        if stop <= {k}:\n            continue\n{anchor}", 1)
    space = dict(vars(curves_kernel))
    exec(compile(src, "<staged fit_rows>", "exec"), space)
    return numba.njit(error_model="numpy")(space["fit_rows_staged"])


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--series", type=int, default=10_000)
    parser.add_argument("--repeat", type=int, default=5)
    args = parser.parse_args()
    G = args.series
    _, y = make(G)
    x, flat = np.tile(DOSES, G), y.reshape(-1)
    lengths = np.full(G, DOSES.size)
    offsets = np.arange(G + 1) * DOSES.size
    rows = np.arange(G)
    p = 4
    cut_t, cut_cook = curves._cut_tables(p, DOSES.size)
    sw_start, sw_coef = curves._shapiro_table(lengths)
    kernel = staged_kernel()

    def run(stop):
        est, se = np.zeros((G, p)), np.zeros((G, p))
        stats = np.full((G, len(curves_kernel.STATS)), np.nan)
        status = np.ones(G, dtype=np.int8)
        t = time.process_time()
        kernel(stop, curves_kernel.L4_LOG, x, flat, np.empty(0), offsets, rows, cut_t,
               cut_cook, sw_start, sw_coef, False, est, se, stats, status)
        return time.process_time() - t, stats

    last = len(STAGES) - 1                                      # no stop: the whole kernel
    run(last)
    upto = [0.0] + [min(run(stop)[0] for _ in range(args.repeat)) for stop in range(last + 1)]
    iterations = float(np.nanmean(run(last)[1][:, curves_kernel.S["iterations"]]))
    print(f"kernel stages, us per series ({G} series x {DOSES.size} points, logistic4, "
          f"mean solver iterations {iterations:.2f}):")
    for k, (_, name) in enumerate(STAGES):
        print(f"  {name:38s} {1e6 * (upto[k + 1] - upto[k]) / G:6.2f}")
    print(f"  {'kernel total':38s} {1e6 * upto[-1] / G:6.2f}")
    fit_many_curves(x[:240], flat[:240], lengths[:10], model=MODEL)
    whole = min(_timed(lambda: fit_many_curves(x, flat, lengths, model=MODEL))
                for _ in range(args.repeat))
    print(f"  {'fit_many_curves (kernel + Python)':38s} {1e6 * whole / G:6.2f}")


def _timed(fn) -> float:
    t = time.process_time()
    fn()
    return time.process_time() - t


if __name__ == "__main__":
    main()
