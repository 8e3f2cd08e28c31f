"""Speed of a compiled model expression against the same model written by hand in numpy.

The model is the 4-parameter logistic ``d + (a - d)/(1 + (x/c)^b)`` at n = 24 points,
the size of call a Levenberg-Marquardt loop makes hundreds of times per fit. Compared,
per call: ``values_and_jacobian`` of the compiled expression (includes the argument
checks and the ``np.errstate`` guard) against a hand-written numpy function computing
the same values and analytic Jacobian, and ``values`` against hand-written values.
Target: within ~3x of the hand-written code. The two Jacobians are checked to agree
before timing.

Run: ``.venv/bin/python benchmarks/bench_expression.py`` (fixed inputs; best of
interleaved rounds, so a busy machine slows both contenders alike).
"""

from __future__ import annotations

import os
import sys
import timeit
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))
from service.core.nonlinear.expression import compile_model  # noqa: E402

TEXT = "d + (a - d)/(1 + (x/c)^b)"
NAMES = ("a", "b", "c", "d")
THETA = np.array([2.0, 1.3, 1.7, 0.2])
X = np.linspace(0.1, 8.0, 24)


def hand_values(x, theta):
    a, b, c, d = theta
    return d + (a - d) / (1.0 + (x / c) ** b)


def hand_values_and_jacobian(x, theta):
    a, b, c, d = theta
    ratio = x / c
    power = ratio ** b
    denominator = 1.0 + power
    share = 1.0 / denominator
    values = d + (a - d) * share
    jacobian = np.empty((x.size, 4))
    jacobian[:, 0] = share
    jacobian[:, 3] = 1.0 - share
    slope = -(a - d) * share * share * power  # d f / d log(power)
    jacobian[:, 1] = slope * np.log(ratio)
    jacobian[:, 2] = slope * (-b / c)
    return values, jacobian


def best_times(funcs, *args, rounds: int = 7, burst: float = 0.15) -> list[float]:
    """Best per-call time (s) of each function over interleaved rounds of ~``burst`` s."""
    numbers = []
    for func in funcs:
        once = timeit.timeit(lambda f=func: f(*args), number=10) / 10
        numbers.append(max(1, int(burst / max(once, 1e-7))))
    best = [float("inf")] * len(funcs)
    for _ in range(rounds):
        for i, (func, number) in enumerate(zip(funcs, numbers, strict=True)):
            best[i] = min(best[i], timeit.timeit(lambda f=func: f(*args), number=number) / number)
    return best


def main() -> int:
    print("load average (1, 5, 15 min): " + ", ".join(f"{v:.2f}" for v in os.getloadavg()))
    model = compile_model(TEXT, NAMES)
    values, jacobian = model.values_and_jacobian(X, THETA)
    hand_v, hand_j = hand_values_and_jacobian(X, THETA)
    print(f"model {model.text!r}, n = {X.size}; largest difference from the hand-written "
          f"code: values {np.max(np.abs(values - hand_v)):.1e}, "
          f"Jacobian {np.max(np.abs(jacobian - hand_j)):.1e}")
    t_model, t_hand, t_model_v, t_hand_v = best_times(
        [model.values_and_jacobian, hand_values_and_jacobian, model.values, hand_values],
        X, THETA)
    print(f"values_and_jacobian {t_model * 1e6:7.2f} us | hand-written numpy "
          f"{t_hand * 1e6:7.2f} us | ratio {t_model / t_hand:5.2f}x (target <= 3x)")
    print(f"values              {t_model_v * 1e6:7.2f} us | hand-written numpy "
          f"{t_hand_v * 1e6:7.2f} us | ratio {t_model_v / t_hand_v:5.2f}x")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
