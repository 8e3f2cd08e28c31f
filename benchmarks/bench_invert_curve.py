"""Reading a stored 4PL standard curve backwards: readings per CPU-second, and the working range.

Measured side by side in one run, on the invented ELISA plate of ``scripts/demo_data.py
plate`` (a logistic4 fit of 16 standards) with 1, 100 and 10,000 readings spread over the
curve and 10% beyond each plateau (statuses ok, interval_exceeds_range,
interval_unbounded, no_real_root; the single reading sits mid-curve), replicates 2:

* ``invert_curve`` of this tree (all readings of a block searched together,
  :mod:`service.core.models.curve_batch`);
* ``invert_curve`` of a baseline tree (``--baseline DIR``, e.g. the start-of-session
  commit unpacked by ``git archive <commit> | tar -x -C DIR``), which read one reading
  at a time; without ``--baseline``, this tree's one-reading search (the batched path's
  fallback and reference) for every reading. Both must give the same answers, checked here.

Each contender runs in its own fresh interpreter (the two trees hold modules of the same
names), rounds alternate baseline and tree, and the best CPU time (``process_time``) of
each is kept, so a busy machine slows both alike. The working range (precision profile,
:mod:`service.core.models.precision_profile`, once per curve) is timed in this tree.

Run: ``.venv/bin/python benchmarks/bench_invert_curve.py [--baseline /tmp/base]``.
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
SIZES = {1: (200, 3), 100: (5, 3), 10_000: (1, 2)}  # readings: (calls per timing, rounds)

_WORKER = """
import json, sys, time
import numpy as np
from scripts.demo_data import plate
from service.core import ModelSpec, fit_series
from service.core.models.curve_inverse import invert_curve
from service.core.models.precision_profile import precision_profile
count, calls, profile = int(sys.argv[1]), int(sys.argv[2]), sys.argv[3] == "1"
if sys.argv[4] == "1":  # every reading through the one-reading search
    from service.core.models import curve_batch
    curve_batch.BATCH_FROM = float("inf")
body = plate()
fitted = fit_series(body["x"], body["y"], model=ModelSpec(family="logistic4")).model
lo, hi = fitted.model.values(np.array([fitted.x_min, fitted.x_max]), fitted.estimates)
reach = abs(hi - lo)
ys = (np.linspace(min(lo, hi) - 0.1 * reach, max(lo, hi) + 0.1 * reach, count)
      if count > 1 else np.array([0.5 * (lo + hi)]))
best = float("inf")
for _ in range(calls):
    start = time.process_time()
    out = invert_curve(fitted, ys, replicates=2)
    best = min(best, time.process_time() - start)
rows = [[e.status, e.x, e.lower, e.upper] for e in out.estimates]
cost = None
if profile:
    start = time.process_time()
    precision_profile(fitted, replicates=2)
    cost = time.process_time() - start
print(json.dumps({"seconds": best, "rows": rows, "profile": cost}))
"""


def _run(tree: Path, count: int, calls: int, profile: bool = False, scalar: bool = False
         ) -> dict:
    done = subprocess.run([sys.executable, "-c", _WORKER, str(count), str(calls),
                           "1" if profile else "0", "1" if scalar else "0"], cwd=tree,
                          capture_output=True, text=True, check=True,
                          env={**os.environ, "PYTHONPATH": str(tree)})
    return json.loads(done.stdout.strip().splitlines()[-1])


def _same(a: list, b: list) -> bool:
    """Statuses equal, numbers equal to 1e-10 relative (NaN where the other is NaN)."""
    def close(p, q):
        if p != p or q != q:  # NaN
            return p != p and q != q
        return abs(p - q) <= 1e-10 * max(abs(p), abs(q), 1e-300)
    return len(a) == len(b) and all(
        ra[0] == rb[0] and all(close(p, q) for p, q in zip(ra[1:], rb[1:], strict=True))
        for ra, rb in zip(a, b, strict=True))


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--baseline", type=Path, default=None,
                        help="an unpacked tree of the commit to compare against "
                             "(default: this tree's one-reading search)")
    given = parser.parse_args().baseline
    base = ROOT if given is None else given.resolve()
    print(f"baseline: {base if given else 'this tree, one reading at a time'}")
    for count, (calls, rounds) in SIZES.items():
        best = {"baseline": float("inf"), "tree": float("inf")}
        rows = {}
        for _ in range(rounds):
            for name, tree in (("baseline", base), ("tree", ROOT)):
                result = _run(tree, count, calls, scalar=given is None and name == "baseline")
                best[name] = min(best[name], result["seconds"])
                rows[name] = result["rows"]
        statuses: dict[str, int] = {}
        for row in rows["tree"]:
            statuses[row[0]] = statuses.get(row[0], 0) + 1
        rate = {k: count / v for k, v in best.items()}
        print(f"{count:>6} readings ({', '.join(f'{k} {v}' for k, v in sorted(statuses.items()))})"
              f"; same answers: {_same(rows['baseline'], rows['tree'])}")
        print(f"       baseline {rate['baseline']:>10.0f} readings/CPU-s "
              f"({1e3 * best['baseline']:.2f} ms CPU)  tree {rate['tree']:>10.0f} readings/CPU-s "
              f"({1e3 * best['tree']:.2f} ms CPU)  ratio {rate['tree'] / rate['baseline']:.1f}x")
    profile_ms = 1e3 * _run(ROOT, 1, 1, profile=True)["profile"]
    print(f"working range (precision profile, once per curve): {profile_ms:.1f} ms CPU")


if __name__ == "__main__":
    main()
