"""Figure render time, measured side by side with a bare matplotlib baseline in one run.

Target (issue: plots over HTTP): median render under 100 ms for n <= 1000 points with the
default figure (the fit panel, 800 x 600 px, PNG). The baseline is the least any
matplotlib PNG of the same size costs on this machine: one Figure, one Axes, the same
points as one line, savefig — so the ratio shows what our panels add on top.

    .venv/bin/python benchmarks/bench_plot.py [--repeats 15]

Prints the median (and p90) in ms for each case, the ratio to the baseline, and whether
the target is met. Data: seeded random quadratic (invented, for timing only).
"""

from __future__ import annotations

import argparse
import io
import statistics
import time
from functools import partial

import numpy as np
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure

from service.core import ModelSpec, fit_series
from service.plots import PANELS, PlotOptions, render

TARGET_MS = 100.0


def _series(n: int, seed: int = 20261201):
    rng = np.random.default_rng(seed)
    x = np.sort(rng.uniform(1.0, 6.0, n))
    return x, 2.0 + 7.2 * x - 1.05 * x**2 + rng.normal(0.0, 0.45, n)


def _baseline(x, y, fmt: str) -> bytes:
    figure = Figure(figsize=(8, 6), dpi=100)
    FigureCanvasAgg(figure)
    figure.add_subplot().plot(x, y, "o")
    buffer = io.BytesIO()
    figure.savefig(buffer, format=fmt, dpi=100)
    return buffer.getvalue()


def _time(fn, repeats: int) -> tuple[float, float]:
    fn()  # warm-up: font cache, first-draw costs
    samples = []
    for _ in range(repeats):
        start = time.perf_counter()
        fn()
        samples.append(1000 * (time.perf_counter() - start))
    samples.sort()
    return statistics.median(samples), samples[int(0.9 * (len(samples) - 1))]


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeats", type=int, default=15)
    args = parser.parse_args()
    print(f"{'case':<38}{'n':>6}{'median ms':>11}{'p90 ms':>9}{'x baseline':>12}  target")
    met = True
    for n in (50, 1000):
        x, y = _series(n)
        report = fit_series(x, y, model=ModelSpec(max_degree=4))
        for fmt in ("png", "svg"):
            base, _ = _time(partial(_baseline, x, y, fmt), args.repeats)
            print(f"{'baseline: bare matplotlib ' + fmt:<38}{n:>6}{base:>11.1f}{'':>9}"
                  f"{1.0:>12.2f}")
            cases = [("default: fit panel " + fmt, ("fit",)),
                     ("fit + studentized residuals " + fmt, ("fit", "studentized_residuals")),
                     ("half-normal (99 simulations) " + fmt, ("half_normal",)),
                     ("all six panels (grown) " + fmt, PANELS)]
            for label, panels in cases:
                options = PlotOptions(panels=panels, format=fmt)  # no size: 800 x 600 or grown
                median, p90 = _time(partial(render, report, x, y, None, options),
                                    args.repeats)
                verdict = ""
                if panels == ("fit",) and fmt == "png":
                    ok = median < TARGET_MS
                    met &= ok
                    verdict = f"{'met' if ok else 'MISSED'} (< {TARGET_MS:.0f} ms)"
                print(f"{label:<38}{n:>6}{median:>11.1f}{p90:>9.1f}{median / base:>12.2f}  "
                      f"{verdict}")
    print("target met" if met else "target missed")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
