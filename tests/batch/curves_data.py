"""Seeded, invented curve data for the nonlinear batch tests (demo designs, not references).

Each generator gives ``count`` series of one family's curve plus normal noise on a
realistic design; parameters vary from series to series. The references the tests
hold the batch to are the single fit (/v1/fit's engine) and scipy, never these values.
"""

from __future__ import annotations

import numpy as np

DOSES = np.repeat(np.geomspace(1e-3, 10.0, 8), 3)      # 8 concentrations x 3 replicates
TIMES = np.repeat(np.linspace(0.0, 10.0, 12), 2)         # 12 times x 2 replicates
SUBSTRATE = np.repeat(np.array([0.5, 1, 2, 4, 8, 16, 32, 64.0]), 3)


def logistic4(rng, count):
    """Falling dose-response curves on log x (y_left 100, y_right ~5, ec50 ~0.1)."""
    out = []
    for _ in range(count):
        left, right = 100.0 + rng.normal(0, 3), 5.0 + rng.normal(0, 2)
        slope, ec50 = 1.2 * np.exp(rng.normal(0, 0.2)), 0.1 * np.exp(rng.normal(0, 0.5))
        y = right + (left - right) / (1.0 + (DOSES / ec50) ** slope)
        out.append((DOSES, y + rng.normal(0, 3.0, DOSES.size)))
    return out


def logistic4_linear(rng, count):
    """Rising logistic curves on linear x (the linear-scale logistic4)."""
    x = np.repeat(np.linspace(0.0, 10.0, 10), 2)
    out = []
    for _ in range(count):
        mid, slope = 5.0 + rng.normal(0, 0.7), 1.1 * np.exp(rng.normal(0, 0.2))
        y = 2.0 + 18.0 / (1.0 + np.exp(-slope * (x - mid)))
        out.append((x, y + rng.normal(0, 0.5, x.size)))
    return out


def exponential(rng, count):
    """First-order decays from ~50 to ~8 at rate ~0.4 per unit of x."""
    out = []
    for _ in range(count):
        y0, plateau, k = 50.0 + rng.normal(0, 3), 8.0 + rng.normal(0, 1), 0.4 * np.exp(
            rng.normal(0, 0.2))
        y = plateau + (y0 - plateau) * np.exp(-k * TIMES)
        out.append((TIMES, y + rng.normal(0, 1.0, TIMES.size)))
    return out


def michaelis_menten(rng, count):
    """Saturation curves: vmax ~12, km ~5, 8 substrate levels x 3 replicates."""
    out = []
    for _ in range(count):
        vmax, km = 12.0 * np.exp(rng.normal(0, 0.1)), 5.0 * np.exp(rng.normal(0, 0.3))
        y = vmax * SUBSTRATE / (km + SUBSTRATE)
        out.append((SUBSTRATE, y + rng.normal(0, 0.3, SUBSTRATE.size)))
    return out


def logistic_growth(rng, count):
    """Growth curves to ~40 with the inflection near day 6 (14 days x 2 replicates)."""
    x = np.repeat(np.arange(0.0, 14.0), 2)
    out = []
    for _ in range(count):
        top, rate, mid = 40.0 * np.exp(rng.normal(0, 0.1)), 0.8 * np.exp(rng.normal(0, 0.2)), \
            6.0 + rng.normal(0, 0.5)
        y = top / (1.0 + np.exp(-rate * (x - mid)))
        out.append((x, y + rng.normal(0, 0.8, x.size)))
    return out


def gompertz(rng, count):
    """Gompertz growth to ~25 on the same design as :func:`logistic_growth`."""
    x = np.repeat(np.arange(0.0, 14.0), 2)
    out = []
    for _ in range(count):
        top, rate, mid = 25.0 * np.exp(rng.normal(0, 0.1)), 0.6 * np.exp(rng.normal(0, 0.2)), \
            5.0 + rng.normal(0, 0.5)
        y = top * np.exp(-np.exp(-rate * (x - mid)))
        out.append((x, y + rng.normal(0, 0.5, x.size)))
    return out


def power(rng, count):
    """Power laws y = c x^e with e ~0.75 over x 1..100 (10 levels x 2 replicates)."""
    x = np.repeat(np.geomspace(1.0, 100.0, 10), 2)
    out = []
    for _ in range(count):
        c, e = 3.0 * np.exp(rng.normal(0, 0.2)), 0.75 + rng.normal(0, 0.05)
        y = c * x ** e
        out.append((x, y + rng.normal(0, 0.02 * y.mean(), x.size)))
    return out


def gaussian_peak(rng, count):
    """Peaks of height ~10 at x ~5, width ~1, on a baseline ~2 (31 points over 0..10)."""
    x = np.linspace(0.0, 10.0, 31)
    out = []
    for _ in range(count):
        base, height = 2.0 + rng.normal(0, 0.3), 10.0 * np.exp(rng.normal(0, 0.1))
        centre, width = 5.0 + rng.normal(0, 0.5), 1.0 * np.exp(rng.normal(0, 0.1))
        y = base + height * np.exp(-0.5 * ((x - centre) / width) ** 2)
        out.append((x, y + rng.normal(0, 0.3, x.size)))
    return out


def weibull(rng, count):
    """Weibull rises from ~2 to ~30, tau ~4, shape ~2 (x 0..12, 13 times x 2 replicates)."""
    x = np.repeat(np.arange(0.0, 13.0), 2)
    out = []
    for _ in range(count):
        y0, plateau = 2.0 + rng.normal(0, 0.3), 30.0 + rng.normal(0, 1.0)
        tau, shape = 4.0 * np.exp(rng.normal(0, 0.1)), 2.0 * np.exp(rng.normal(0, 0.1))
        y = plateau + (y0 - plateau) * np.exp(-(x / tau) ** shape)
        out.append((x, y + rng.normal(0, 0.6, x.size)))
    return out


def logistic5(rng, count):
    """Asymmetric falling dose-response curves on log x: 12 concentrations x 2 replicates,
    y_left ~100, y_right ~5, ec50 ~0.1, asymmetry ~0.5 (the high-dose end approached slowly)."""
    x = np.repeat(np.geomspace(1e-4, 100.0, 13), 2)
    out = []
    for _ in range(count):
        left, right = 100.0 + rng.normal(0, 3), 5.0 + rng.normal(0, 2)
        slope, ec50 = 1.2 * np.exp(rng.normal(0, 0.2)), 0.1 * np.exp(rng.normal(0, 0.5))
        g = 0.5 * np.exp(rng.normal(0, 0.2))
        c = 2.0 ** (1.0 / g) - 1.0
        y = right + (left - right) / (1.0 + c * (x / ec50) ** slope) ** g
        out.append((x, y + rng.normal(0, 1.0, x.size)))
    return out


def logistic5_linear(rng, count):
    """Asymmetric rising curves on linear x (the linear-scale logistic5), 16 x 2 points."""
    x = np.repeat(np.linspace(0.0, 10.0, 16), 2)
    out = []
    for _ in range(count):
        mid, slope = 5.0 + rng.normal(0, 0.5), 1.0 * np.exp(rng.normal(0, 0.2))
        g = 2.0 * np.exp(rng.normal(0, 0.2))
        c = 2.0 ** (1.0 / g) - 1.0
        y = 20.0 + (2.0 - 20.0) / (1.0 + c * np.exp(slope * (x - mid))) ** g
        out.append((x, y + rng.normal(0, 0.3, x.size)))
    return out


def biexponential(rng, count):
    """Two-phase decays: a fast phase ~8 at rate ~1, a slow one ~4 at rate ~0.1
    (14 times from 0.25 to 24, geometrically spaced, x 2 replicates)."""
    x = np.repeat(np.geomspace(0.25, 24.0, 14), 2)
    out = []
    for _ in range(count):
        a_fast, k_fast = 8.0 * np.exp(rng.normal(0, 0.1)), 1.0 * np.exp(rng.normal(0, 0.2))
        a_slow, k_slow = 4.0 * np.exp(rng.normal(0, 0.1)), 0.1 * np.exp(rng.normal(0, 0.2))
        y = a_fast * np.exp(-k_fast * x) + a_slow * np.exp(-k_slow * x)
        out.append((x, y + rng.normal(0, 0.1, x.size)))
    return out


def flat(series):
    """Concatenated x, y and the lengths of ``series`` ((x, y) pairs)."""
    return (np.concatenate([s[0] for s in series]), np.concatenate([s[1] for s in series]),
            np.array([s[0].size for s in series]))
