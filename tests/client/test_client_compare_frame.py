"""``frames.candidates_frame`` of a comparison of model families (``model.candidates``).

A comparison's answer has no polynomial ``selection`` but a ``comparison`` section; the
helper gives one row per candidate by label, with the same numbers as the answer. Oracle:
the answer's own comparison rows (the frame must neither drop nor reorder them) and, for
the chosen logistic4, scipy.optimize.curve_fit's residual sum of squares (seeded demo).
"""

from __future__ import annotations

import numpy as np
import pytest
from curvewise_client import frames
from scipy.optimize import curve_fit

X = np.repeat([0.0, 0.1, 0.3, 1.0, 3.0, 10.0, 30.0, 100.0], 2)


def _four_pl(x, y_left, y_right, slope, ec50):
    return y_right + (y_left - y_right) / (1.0 + (x / ec50) ** slope)


def test_a_family_comparison_becomes_one_row_per_candidate(inprocess_client):
    y = _four_pl(X, 0.05, 2.5, 1.2, 5.0) + np.random.default_rng(5).normal(0.0, 0.03, X.size)
    fit = inprocess_client.fit(X, y, model={"candidates": [
        {"family": "logistic4"}, {"family": "logistic5"}, {"family": "michaelis_menten"}]})
    table = frames.candidates_frame(fit)
    assert list(table.index) == [c.label for c in fit.comparison.candidates]
    assert list(table["aicc"]) == [c.aicc for c in fit.comparison.candidates]
    best, _ = curve_fit(_four_pl, X, y, p0=[0.0, 2.5, 1.0, 5.0])   # oracle: scipy
    rss = float(np.sum((_four_pl(X, *best) - y) ** 2))
    assert table.loc["logistic4", "rss"] == pytest.approx(rss, rel=1e-7)


def test_a_single_family_fit_has_no_candidates_to_tabulate(inprocess_client):
    fit = inprocess_client.fit(X[2:], _four_pl(X[2:], 0.05, 2.5, 1.2, 5.0),
                               model={"family": "michaelis_menten"})
    with pytest.raises(ValueError, match="model.candidates"):
        frames.candidates_frame(fit)
