"""Half-normal plot of |studentized residuals| with a simulated envelope (Atkinson 1981).

Atkinson, A. C. (1981). Two graphical displays for outlying and influential
observations in regression. Biometrika 68(1), 13-20. The envelope is
simulated from the fit's own hat matrix ``H = Q Q'``: for each simulation,
standard normal responses ``z`` give residuals ``e = (I - H) z``, which are
externally studentized exactly as the core does for the data (same leverages,
same ``n - p - 1`` df), taken in absolute value and sorted. The band is the
pointwise minimum and maximum over the simulations, so under the model each
sorted observed value lies above the upper edge with probability
``1 / (simulations + 1)`` (exchangeability); the dashed line is their mean.

Half-normal positions are ``Phi^-1((n + i - 1/8) / (2n + 1/2))``, i = 1..n
(Atkinson 1985, Plots, Transformations and Regression; quoted from memory).
Simulations are seeded and bounded: :data:`SIMULATIONS` of them, or
:data:`SIMULATIONS_LARGE` above :data:`LARGE_N` points, drawn in blocks of
at most :data:`BLOCK_VALUES` values.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import special

SEED = 20_250_613
SIMULATIONS = 99
SIMULATIONS_LARGE = 19  # still a 1-in-20 envelope; bounds the cost for very long series
LARGE_N = 20_000
BLOCK_VALUES = 1_000_000


@dataclass(frozen=True, slots=True)
class Envelope:
    """Sorted observed ``|t|`` at half-normal positions, with the simulated band.

    ``order`` gives, for each sorted value, its position among the plotted points.
    """

    positions: np.ndarray
    observed: np.ndarray
    order: np.ndarray
    lower: np.ndarray
    upper: np.ndarray
    mean: np.ndarray
    simulations: int


def half_normal_positions(n: int) -> np.ndarray:
    """Expected positions of ``n`` sorted absolute standard normal values."""
    i = np.arange(1, n + 1, dtype=float)
    return special.ndtri((n + i - 0.125) / (2 * n + 0.5))


def simulation_count(n: int) -> int:
    """How many simulated fits draw the envelope of ``n`` points."""
    return SIMULATIONS if n <= LARGE_N else SIMULATIONS_LARGE


def normal_draws(rng: np.random.Generator, rows: int, n: int) -> np.ndarray:
    """The next ``rows`` simulated response vectors of ``n`` standard normal values each."""
    return rng.standard_normal((rows, n))


def studentized_abs(e: np.ndarray, one_minus_h: np.ndarray, df: int) -> np.ndarray:
    """``|e_i| / sqrt(s_(i)² (1 - h_i))`` for each row of residuals ``e`` (one fit a row)."""
    rss = np.sum(e * e, axis=-1, keepdims=True)
    s2 = (rss - e * e / one_minus_h) / (df - 1)
    return np.abs(e) / np.sqrt(s2 * one_minus_h)


def envelope(studentized: np.ndarray, basis: np.ndarray, *, seed: int = SEED) -> Envelope | None:
    """The half-normal display of ``studentized`` (externally studentized residuals).

    Parameters
    ----------
    studentized : ndarray
        The fit's externally studentized residuals; non-finite ones (no df, leverage
        one) are left out of the display and of every simulated fit alike.
    basis : ndarray
        ``(n, p)`` orthonormal basis of the weighted design (``H = Q Q'``).

    Returns None when fewer than two residuals are defined or ``n - p < 2``.
    """
    n, p = basis.shape
    ok = np.isfinite(studentized)
    df = n - p
    if ok.sum() < 2 or df < 2:
        return None
    one_minus_h = 1.0 - np.einsum("ij,ij->i", basis, basis)
    sims = simulation_count(n)
    rows = max(1, min(sims, BLOCK_VALUES // n))
    rng = np.random.default_rng(seed)
    lower = np.full(int(ok.sum()), np.inf)
    upper = np.full_like(lower, -np.inf)
    total = np.zeros_like(lower)
    count = np.zeros_like(lower)
    done = 0
    with np.errstate(all="ignore"):
        while done < sims:
            z = normal_draws(rng, min(rows, sims - done), n)
            e = z - (z @ basis) @ basis.T
            sorted_abs = np.sort(studentized_abs(e, one_minus_h, df)[:, ok], axis=1)
            lower = np.fmin(lower, np.min(sorted_abs, axis=0))
            upper = np.fmax(upper, np.max(sorted_abs, axis=0))
            finite = np.isfinite(sorted_abs)
            total += np.where(finite, sorted_abs, 0.0).sum(axis=0)
            count += finite.sum(axis=0)
            done += z.shape[0]
        mean = total / count
    values = np.abs(studentized[ok])
    order = np.argsort(values, kind="stable")
    return Envelope(positions=half_normal_positions(values.size), observed=values[order],
                    order=np.flatnonzero(ok)[order], lower=lower, upper=upper, mean=mean,
                    simulations=sims)
