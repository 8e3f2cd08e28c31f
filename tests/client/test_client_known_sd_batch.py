"""The client's batch paths with known measurement SDs (weighting "known_sd").

``Client.batch_frame`` passes ``options`` through to the ``options`` query parameter, so
``options={"weighting": "known_sd"}`` needs no client change. Oracles: statsmodels WLS
with the scale fixed at 1 (``cov_type="fixed scale"``) for the standard errors, and
``scipy.stats.chi2.sf`` on n - p df for the goodness-of-fit p-value. Seeded invented data.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from curvewise_client import frames
from scipy import stats


def _long(count: int = 6, seed: int = 17) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    parts = []
    for i in range(count):
        x = np.repeat(np.linspace(0.0, 10.0, 6 + i % 3), 2)
        sd = 0.1 + 0.03 * x
        y = 0.5 + 0.8 * x + rng.normal(0.0, sd)
        parts.append(pd.DataFrame({"probe": f"c{i}", "ref": x, "reading": y,
                                   "w": 1.0 / sd ** 2}))
    return pd.concat(parts, ignore_index=True)


def test_batch_frame_with_known_sds_equals_statsmodels_with_a_fixed_scale(inprocess_client):
    frame = _long()
    out = inprocess_client.batch_frame(frame, id="probe", x="ref", y="reading", weight="w",
                                       model={"degree": 1}, options={"weighting": "known_sd"})
    assert (out["status"] == "ok").all()
    for row, (_, group) in zip(out.itertuples(), frame.groupby("probe", sort=False),
                               strict=True):
        x, y, w = group["ref"].to_numpy(), group["reading"].to_numpy(), group["w"].to_numpy()
        wls = sm.WLS(y, sm.add_constant(x), weights=w).fit(cov_type="fixed scale",
                                                            cov_kwds={"scale": 1.0})
        np.testing.assert_allclose([row.se_0, row.se_1], wls.bse, rtol=1e-9)
        assert row.chi_square_fit_p == pytest.approx(stats.chi2.sf(wls.ssr, x.size - 2),
                                                     rel=1e-9)
    relative = inprocess_client.batch_frame(frame, id="probe", x="ref", y="reading",
                                            weight="w", model={"degree": 1})
    assert relative["chi_square_fit_p"].isna().all()


def test_tidy_frames_of_json_batches_carry_the_chi_square_test(inprocess_client):
    frame = _long(3)
    series = frames.series_from_long_frame(frame, id="probe", x="ref", y="reading",
                                           weight="w")
    arrow = inprocess_client.batch_frame(frame, id="probe", x="ref", y="reading", weight="w",
                                         model={"degree": 1}, options={"weighting": "known_sd"})
    for detail in ("summary", "full"):
        answer = inprocess_client.batch(series, model={"degree": 1}, weighting="known_sd",
                                        detail=detail)
        tidy = frames.batch_frame(answer)
        np.testing.assert_allclose(tidy["chi_square_fit_p"].to_numpy(dtype=float),
                                   arrow["chi_square_fit_p"].to_numpy(dtype=float), rtol=1e-10)
