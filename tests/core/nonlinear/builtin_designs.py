"""Seeded synthetic series of every built-in family (used by builtin_simulation.py).

Each family's curve is written again here in plain numpy, independently of the
service's equation text (``log4``, the log-scale logistic4, is public for a test
that needs it by name). Designs, parameter ranges and noise are invented but typical of each
kind of experiment (dose-response plates, growth curves, decay and kinetics runs,
chromatographic peaks); every draw is bounded and seeded.
"""

from __future__ import annotations

from typing import NamedTuple

import numpy as np


def log4(x, y_left, y_right, slope, ec50):
    return y_right + (y_left - y_right) / (1 + (x / ec50) ** slope)


def _lin4(x, y_left, y_right, slope, ec50):
    return y_right + (y_left - y_right) / (1 + np.exp(slope * (x - ec50)))


def _log5(x, y_left, y_right, slope, ec50, g):
    return y_right + (y_left - y_right) / (1 + (2 ** (1 / g) - 1) * (x / ec50) ** slope) ** g


def _exponential(x, y0, plateau, k):
    return plateau + (y0 - plateau) * np.exp(-k * x)


def _michaelis_menten(x, vmax, km):
    return vmax * x / (km + x)


def _gompertz(x, asymptote, rate, inflection):
    return asymptote * np.exp(-np.exp(-rate * (x - inflection)))


def _logistic_growth(x, asymptote, rate, inflection):
    return asymptote / (1 + np.exp(-rate * (x - inflection)))


def _power(x, coefficient, exponent):
    return coefficient * x ** exponent


def _gaussian(x, baseline, height, centre, width):
    return baseline + height * np.exp(-0.5 * ((x - centre) / width) ** 2)


def _biexponential(x, a_fast, k_fast, a_slow, k_slow):
    return a_fast * np.exp(-k_fast * x) + a_slow * np.exp(-k_slow * x)


def _weibull(x, y0, plateau, tau, shape):
    return plateau + (y0 - plateau) * np.exp(-(x / tau) ** shape)


DOMAINS = {  # the documented constraints (GET /v1/families) the reference must respect
    "michaelis_menten": lambda t: t[1] > 0,
    "weibull": lambda t: t[2] > 0 and t[3] > 0,
}


class Case(NamedTuple):
    """One synthetic series: its family, x scale, data, true values and the numpy curve."""

    family: str
    scale: str | None
    x: np.ndarray
    y: np.ndarray
    truth: np.ndarray
    curve: object


def _doses(rng, levels, replicates, zero):
    x = np.repeat(np.geomspace(1e-3, 1e-3 * 10 ** rng.uniform(3, 4.5), levels), replicates)
    return np.concatenate([np.zeros(replicates), x]) if zero else x


def _logistic_case(rng, five: bool):
    log = five or rng.uniform() < 0.75
    x = _doses(rng, int(rng.integers(8, 13)), int(rng.integers(2, 4)),
               zero=log and rng.uniform() < 0.3) if log else np.repeat(
        np.linspace(0, 10, int(rng.integers(8, 13))), int(rng.integers(2, 4)))
    positive = x[x > 0]
    lo, hi = (np.log(positive.min()), np.log(positive.max())) if log else (x.min(), x.max())
    mid = rng.uniform(lo + 0.25 * (hi - lo), hi - 0.25 * (hi - lo))
    left = rng.uniform(0, 1)
    right = left + rng.choice([-1, 1]) * rng.uniform(1, 5)
    slope = rng.uniform(0.6, 3.0) * (1.0 if log else 10 / (hi - lo) / 2)
    truth = [left, right, slope, float(np.exp(mid)) if log else mid]
    if five:
        truth.append(float(np.exp(rng.uniform(np.log(0.3), np.log(3)))))
    curve = _log5 if five else (log4 if log else _lin4)
    sd = rng.uniform(0.02, 0.04 if five else 0.05) * abs(right - left)
    return Case("logistic5" if five else "logistic4", "log" if log else "linear", x,
                curve(x, *truth) + rng.normal(0, sd, x.size), np.array(truth), curve)


def _exponential_case(rng):
    end = rng.uniform(5, 50)
    x = np.sort(rng.uniform(0, end, int(rng.integers(10, 21))))
    truth = [rng.uniform(-5, 20), rng.uniform(-5, 20), rng.uniform(1, 6) / end]
    sd = rng.uniform(0.02, 0.05) * max(abs(truth[0] - truth[1]), 1.0)
    return _case("exponential", x, truth, sd, _exponential, rng)


def _mm_case(rng):
    x = np.geomspace(1, 10 ** rng.uniform(1.5, 3), int(rng.integers(7, 13)))
    km = float(np.exp(rng.uniform(np.log(x[1]), np.log(x[-2]))))
    truth = [rng.uniform(1, 100), km]
    return _case("michaelis_menten", x, truth, rng.uniform(0.02, 0.05) * truth[0],
                 _michaelis_menten, rng)


def _growth_case(rng, name, curve):
    end = rng.uniform(10, 100)
    x = np.linspace(0, end, int(rng.integers(15, 26)))
    truth = [rng.uniform(1, 100), rng.uniform(4, 12) / end, rng.uniform(0.3, 0.7) * end]
    return _case(name, x, truth, rng.uniform(0.02, 0.04) * truth[0], curve, rng)


def _power_case(rng):
    x = np.geomspace(rng.uniform(0.1, 2), rng.uniform(5, 100), int(rng.integers(8, 16)))
    exponent = rng.choice([-1, 1]) * rng.uniform(0.3, 2.5)
    truth = [rng.uniform(0.5, 10), exponent]
    scale = np.median(np.abs(_power(x, *truth)))
    return _case("power", x, truth, rng.uniform(0.02, 0.05) * scale, _power, rng)


def _gaussian_case(rng):
    x = np.linspace(0, 10, int(rng.integers(30, 61)))
    height = rng.choice([-1, 1]) * rng.uniform(1, 10)
    truth = [rng.uniform(-2, 2), height, rng.uniform(2, 8), rng.uniform(0.3, 1.5)]
    return _case("gaussian_peak", x, truth, rng.uniform(0.02, 0.05) * abs(height), _gaussian,
                 rng)


def _biexponential_case(rng):
    end = rng.uniform(12, 48)
    x = np.unique(np.round(np.geomspace(end / 64, end, int(rng.integers(12, 19))), 6))
    k_slow = rng.uniform(1, 4) / end
    truth = [rng.uniform(2, 10), k_slow * rng.uniform(5, 20), rng.uniform(1, 5), k_slow]
    return _case("biexponential", x, truth, rng.uniform(0.01, 0.02) * (truth[0] + truth[2]),
                 _biexponential, rng)


def _weibull_case(rng):
    end = rng.uniform(5, 50)
    x = np.linspace(0, end, int(rng.integers(15, 26)))
    truth = [rng.uniform(-5, 5), rng.uniform(5, 20), rng.uniform(0.2, 0.6) * end,
             float(np.exp(rng.uniform(np.log(0.5), np.log(4))))]
    return _case("weibull", x, truth, rng.uniform(0.02, 0.04) * abs(truth[1] - truth[0]),
                 _weibull, rng)


def _case(name, x, truth, sd, curve, rng) -> Case:
    return Case(name, None, x, curve(x, *truth) + rng.normal(0, sd, x.size), np.array(truth),
                curve)


MAKERS = {
    "logistic4": lambda rng: _logistic_case(rng, False),
    "logistic5": lambda rng: _logistic_case(rng, True),
    "exponential": _exponential_case,
    "michaelis_menten": _mm_case,
    "gompertz": lambda rng: _growth_case(rng, "gompertz", _gompertz),
    "logistic_growth": lambda rng: _growth_case(rng, "logistic_growth", _logistic_growth),
    "power": _power_case,
    "gaussian_peak": _gaussian_case,
    "biexponential": _biexponential_case,
    "weibull": _weibull_case,
}


def cases(family: str, count: int, seed: int) -> list[Case]:
    """``count`` seeded series of ``family``."""
    rng = np.random.default_rng([seed, list(MAKERS).index(family)])
    return [MAKERS[family](rng) for _ in range(count)]
