"""The batch kernel's F(1, df) tail against scipy.special.fdtrc (the single-series path's).

Seeded grid: every df from 1 to 300 and a sample up to 6,000, with F from 1e-8 to 1e6
(so p from ~1 down to ~1e-280), plus the edge values 0, inf and NaN.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import special

from service.core.batch.ftail import f1_tail, log_beta_table


def test_f1_tail_equals_scipy_fdtrc_over_df_and_f():
    rng = np.random.default_rng(2026)
    df = np.r_[np.repeat(np.arange(1, 301), 40), rng.integers(301, 6001, 8000)].astype(float)
    f = 10.0 ** rng.uniform(-8.0, 6.0, df.size)
    f[::5] = rng.uniform(0.0, 12.0, f[::5].size)      # the usual range of a last power's F
    table = log_beta_table(6001)
    got = np.array([f1_tail(fi, di, table[int(di)]) for fi, di in zip(f, df, strict=True)])
    ref = special.fdtrc(1, df, f)
    keep = ref > 1e-280
    assert keep.sum() > 0.9 * keep.size
    rel = np.abs(got[keep] - ref[keep]) / ref[keep]
    assert rel.max() < 1e-10, (rel.max(), f[keep][rel.argmax()], df[keep][rel.argmax()])
    assert np.all(got[~keep] < 1e-270)


@pytest.mark.parametrize("f, expected", [(0.0, 1.0), (np.inf, 0.0)])
def test_f1_tail_edges(f, expected):
    assert f1_tail(f, 10.0, log_beta_table(11)[10]) == expected


def test_f1_tail_of_nan_is_nan():
    assert np.isnan(f1_tail(np.nan, 10.0, log_beta_table(11)[10]))
