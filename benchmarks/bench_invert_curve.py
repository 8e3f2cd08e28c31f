"""Reading a stored 4PL standard curve backwards: time per reading and the working range.

Measured side by side in one run (best of interleaved rounds, so a busy machine slows
every contender alike), on the invented ELISA plate of ``scripts/demo_data.py plate``
(a logistic4 fit of 16 standards) with 200 readings spread over the curve and 10% beyond
each plateau (statuses ok, interval_exceeds_range, interval_unbounded, no_real_root):

* ``invert_curve`` as the service runs it: the band of the mean of m readings evaluated
  directly (one Jacobian product per point, critical value computed once), the ladder
  beyond the range evaluated in one call;
* the same search with the band taken from ``predict`` at every point (how the interval
  search first did it); both must give the same answers, checked here;
* the working range (precision profile, :mod:`service.core.models.precision_profile`),
  computed once per curve, next to one reading's inversion.

Run: ``.venv/bin/python benchmarks/bench_invert_curve.py``.
"""

from __future__ import annotations

import sys
import timeit
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))
from scripts.demo_data import plate  # noqa: E402
from service.core import ModelSpec, fit_series  # noqa: E402
from service.core.models import curve_inverse  # noqa: E402
from service.core.models.precision_profile import precision_profile  # noqa: E402
from service.core.nonlinear.analysis import predict  # noqa: E402

READINGS, ROUNDS, M = 200, 5, 2


def _predict_band(self, x, y0, m):
    """The band through ``predict`` at each point (the earlier, slower evaluation)."""
    band = predict(self.fitted, np.atleast_1d(np.asarray(x, dtype=float)), level=self.level,
                   m=m)
    return np.maximum(np.asarray(band.obs_lower) - y0, y0 - np.asarray(band.obs_upper))


def main() -> None:
    body = plate()
    fitted = fit_series(body["x"], body["y"], model=ModelSpec(family="logistic4")).model
    lo, hi = fitted.model.values(np.array([fitted.x_min, fitted.x_max]), fitted.estimates)
    reach = abs(hi - lo)
    ys = np.linspace(min(lo, hi) - 0.1 * reach, max(lo, hi) + 0.1 * reach, READINGS)
    direct = curve_inverse._CurveReader.outside_band

    def run_direct():
        curve_inverse._CurveReader.outside_band = direct
        return curve_inverse.invert_curve(fitted, ys, replicates=M)

    def run_predict():
        curve_inverse._CurveReader.outside_band = _predict_band
        try:
            return curve_inverse.invert_curve(fitted, ys, replicates=M)
        finally:
            curve_inverse._CurveReader.outside_band = direct

    a, b = run_direct(), run_predict()
    same = all(ea.status == eb.status and np.allclose(
        [ea.x, ea.lower, ea.upper], [eb.x, eb.lower, eb.upper], rtol=1e-12, equal_nan=True)
        for ea, eb in zip(a.estimates, b.estimates, strict=True))
    statuses: dict[str, int] = {}
    for e in a.estimates:
        statuses[e.status] = statuses.get(e.status, 0) + 1
    times = {"direct": [], "predict": [], "profile": []}
    for _ in range(ROUNDS):
        times["direct"].append(timeit.timeit(run_direct, number=1))
        times["predict"].append(timeit.timeit(run_predict, number=1))
        times["profile"].append(timeit.timeit(lambda: precision_profile(fitted, replicates=M),
                                              number=1))
    direct_ms = 1e3 * min(times["direct"]) / READINGS
    predict_ms = 1e3 * min(times["predict"]) / READINGS
    profile_ms = 1e3 * min(times["profile"])
    print(f"readings: {READINGS} ({', '.join(f'{k} {v}' for k, v in sorted(statuses.items()))});"
          f" same answers both ways: {same}")
    print(f"invert, band evaluated directly: {direct_ms:.3f} ms per reading")
    print(f"invert, band through predict:    {predict_ms:.3f} ms per reading "
          f"(ratio {predict_ms / direct_ms:.2f}x)")
    print(f"working range (precision profile, once per curve): {profile_ms:.1f} ms "
          f"= {profile_ms / direct_ms:.0f} readings' worth")


if __name__ == "__main__":
    main()
