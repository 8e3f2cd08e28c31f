"""Seeded series generators for the batch tests (random data compared against oracles)."""

from __future__ import annotations

import numpy as np
import pytest


def ragged_series(seed: int, count: int, lo: int = 20, hi: int = 80, *, weighted=False,
                  sorted_x=None):
    """``count`` seeded series of random length lo..hi: quadratic trend plus noise.

    Half of them (alternating) have x in increasing order, the others shuffled,
    unless ``sorted_x`` forces one or the other.
    """
    rng = np.random.default_rng(seed)
    out = []
    for i in range(count):
        n = int(rng.integers(lo, hi + 1))
        x = rng.uniform(0.0, 10.0, n)
        if sorted_x or (sorted_x is None and i % 2 == 0):
            x = np.sort(x)
        noise = rng.normal(0.0, 0.5 + 0.1 * (i % 5), n)
        y = 2.0 + 0.8 * x - 0.06 * x * x + 0.004 * (i % 3) * x ** 3 + noise
        w = rng.uniform(0.5, 2.0, n) if weighted else None
        out.append((x, y, w))
    return out


@pytest.fixture
def ragged():
    return ragged_series(20261201, 150)


def rel(a, b) -> float:
    """Largest relative difference of two arrays (NaN only where both are NaN)."""
    a, b = np.asarray(a, dtype=float), np.asarray(b, dtype=float)
    assert np.array_equal(np.isnan(a), np.isnan(b)), (a, b)
    keep = ~np.isnan(a)
    if not keep.any():
        return 0.0
    scale = np.maximum(np.abs(b[keep]), 1e-300)
    return float(np.max(np.abs(a[keep] - b[keep]) / scale))


class _NoSingleFit:
    """A family whose single fit fails: any row the compiled engine leaves is an error."""

    def __init__(self, entry):
        self._entry = entry

    def __getattr__(self, name):
        return getattr(self._entry, name)

    def fit(self, *args, **kwargs):
        raise AssertionError("the batch fell back to the single fit")


@pytest.fixture
def compiled_only(monkeypatch):
    """Nonlinear batches may not fall back to the single fit (it raises inside the batch);
    other callers of the single fit are untouched."""
    from service.core.batch import curves
    real = curves.family
    monkeypatch.setattr(curves, "family", lambda name, **kw: _NoSingleFit(real(name, **kw)))
