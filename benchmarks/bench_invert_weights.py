"""Reading a weighted 4PL standard curve backwards with a weight per reading: the CPU cost of
``weights`` next to the same readings without them, measured side by side in one run.

A seeded invented log-dose logistic4 (21 standards, 4% CV, fitted with weights 1/y^2) and
1,000 readings spread over the curve; each reading's weight is 1/y^2, so every reading has
its own band (:meth:`CurveReader.band_table
<service.core.models.curve_reader.CurveReader.band_table>`). Rounds alternate the two
calls and the best CPU time (``process_time``) of each is kept, so a busy machine slows
both alike. Prints the two times and their ratio.

Run: ``.venv/bin/python benchmarks/bench_invert_weights.py``.
"""

from __future__ import annotations

import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

from service.core import ModelSpec, fit_series  # noqa: E402
from service.core.models.curve_inverse import invert_curve  # noqa: E402

ROUNDS = 5


def main() -> None:
    rng = np.random.default_rng(7)
    x = np.repeat(np.geomspace(0.05, 50, 7), 3)
    mu = 0.1 + 1.9 / (1 + (x / 2.0) ** -1.3)
    y = mu * (1 + 0.04 * rng.standard_normal(x.size))
    fitted = fit_series(x, y, 1 / y**2, model=ModelSpec(family="logistic4", scale="log")).model
    readings = rng.uniform(0.2, 1.9, 1000)
    weights = 1 / readings**2
    invert_curve(fitted, readings[:10], weights=weights[:10])  # warm both paths
    best = {"without weights": np.inf, "with weights": np.inf}
    for _ in range(ROUNDS):
        for name, extra in (("without weights", {}), ("with weights", {"weights": weights})):
            start = time.process_time()
            invert_curve(fitted, readings, **extra)
            best[name] = min(best[name], time.process_time() - start)
    for name, seconds in best.items():
        print(f"{name:>16}: {seconds * 1e3:8.1f} ms CPU for {readings.size} readings")
    print(f"ratio with / without: {best['with weights'] / best['without weights']:.1f}")


if __name__ == "__main__":
    main()
