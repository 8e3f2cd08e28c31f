"""Batch (JSON and streamed NDJSON) and the pandas helpers, against the real service.

Oracle: statsmodels OLS parameters for each series (seeded random data). The faulty
series (a single distinct x) must come back as that series' own error.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from curvewise_client import BatchResult, frames


def _series(count: int, seed: int = 4):
    rng = np.random.default_rng(seed)
    out = []
    for i in range(count):
        x = np.sort(rng.uniform(0, 10, 12 + i % 5))
        y = 1.0 + 0.4 * i + 0.8 * x + rng.normal(0, 0.3, x.size)
        out.append({"id": f"s{i:03d}", "x": x, "y": y})
    return out


def _ols(item):
    return sm.OLS(np.asarray(item["y"]), sm.add_constant(np.asarray(item["x"]))).fit().params


def test_json_batch_keeps_order_and_isolates_the_bad_series(api):
    series = _series(4)
    series.insert(2, {"id": "flat", "x": [2.0, 2.0, 2.0], "y": [1.0, 2.0, 3.0]})
    result = api.batch(series, model={"degree": 1})
    assert isinstance(result, BatchResult)
    assert [r.id for r in result.results] == [s["id"] for s in series]
    assert [r.ok for r in result.results] == [True, True, False, True, True]
    bad = result.results[2]
    assert bad.problem.status == 422 and "model.degree" in bad.problem.errors
    assert result.summary["ok"] == 4 and result.summary["error"] == 1
    for item, sent in zip(result.results, series, strict=True):
        if item.ok:
            np.testing.assert_allclose(item.fit["estimate"], _ols(sent), rtol=1e-9)


def test_ndjson_stream_of_a_generator(api):
    sent = _series(60, seed=9)

    def lines():
        yield from sent

    with api.batch_stream(lines(), model={"degree": 1}) as stream:
        items = list(stream)
    assert [it.id for it in items] == [s["id"] for s in sent] and all(it.ok for it in items)
    assert stream.summary["ok"] == 60
    for item, series in list(zip(items, sent, strict=True))[::15]:
        np.testing.assert_allclose(item.fit["estimate"], _ols(series), rtol=1e-9)


def test_fit_long_frame_in_one_call(api):
    series = _series(5, seed=1)
    long = pd.DataFrame([{"probe": s["id"], "ref": xi, "reading": yi}
                         for s in series for xi, yi in zip(s["x"], s["y"], strict=True)])
    for stream in (False, True):
        out = frames.fit_long_frame(api, long, id="probe", x="ref", y="reading",
                                    model={"degree": 1}, stream=stream)
        assert list(out["id"]) == [s["id"] for s in series]
        assert (out["status"] == "ok").all()
        np.testing.assert_allclose(out[["coef_0", "coef_1"]].to_numpy(dtype=float),
                                   np.vstack([_ols(s) for s in series]), rtol=1e-9)


def test_result_frames_of_one_fit(api):
    (item,) = _series(1, seed=3)
    x, y = item["x"], item["y"] + 0.05 * item["x"] ** 2
    fit = api.fit(x, y, degree=2, grid={"count": 25})
    design = np.vander(x, 3, increasing=True)
    model = sm.OLS(y, design).fit()
    coef = frames.coefficients_frame(fit)
    assert list(coef.index) == ["intercept", "x", "x^2"]
    np.testing.assert_allclose(coef["estimate"], model.params, rtol=1e-9)
    np.testing.assert_allclose(coef["std_error"], model.bse, rtol=1e-8)
    anova = frames.anova_frame(fit)
    assert list(anova.index) == ["x", "x^2", "residual"]
    assert anova.loc["residual", "sum_of_squares"] == pytest.approx(model.ssr, rel=1e-9)
    grid = frames.grid_frame(fit)
    assert len(grid) == 25 and {"x", "fit", "obs_lower", "obs_upper"} <= set(grid.columns)
    trail = frames.candidates_frame(fit)
    assert list(trail.index) == [2]
    pred = frames.predictions_frame(api.predict(fit, [1.0, 2.0]))
    expected = model.get_prediction(np.vander([1.0, 2.0], 3, increasing=True)).predicted_mean
    np.testing.assert_allclose(pred["fit"], expected, rtol=1e-9)


class _Boom(Exception):
    pass


def test_an_error_in_the_callers_iterator_surfaces_as_itself(api):
    def series():
        yield from _series(3)
        raise _Boom("the caller's own reader failed")

    with pytest.raises(_Boom):
        with api.batch_stream(series(), model={"degree": 1}) as stream:
            list(stream)


def _decay_series(count: int, seed: int = 21):
    rng = np.random.default_rng(seed)
    out = []
    for i in range(count):
        x = np.linspace(0.0, 6.0, 15)
        y = 1.0 + (5.0 + i) * np.exp(-(0.6 + 0.1 * i) * x) + rng.normal(0, 0.05, x.size)
        out.append({"id": f"d{i}", "x": x, "y": y})
    return out


def _decay_oracle(item):
    """scipy's curve_fit (an outside least-squares solver) on y0, plateau, k."""
    from scipy.optimize import curve_fit

    def curve(x, y0, plateau, k):
        return plateau + (y0 - plateau) * np.exp(-k * x)

    params, cov = curve_fit(curve, item["x"], item["y"], p0=[5.0, 1.0, 0.5])
    return params, np.sqrt(np.diag(cov))


@pytest.mark.parametrize("detail", ["summary", "full"])
def test_long_frame_of_a_nonlinear_family_has_its_parameters(api, detail):
    # The tidy columns of a nonlinear batch are est_<parameter> and se_<parameter>, as the
    # service's own frames name them (service/core/batch/curves_frames.py, docs/scaling.md).
    series = _decay_series(3)
    long = pd.DataFrame([{"id": s["id"], "x": xi, "y": yi}
                         for s in series for xi, yi in zip(s["x"], s["y"], strict=True)])
    out = frames.fit_long_frame(api, long, model={"family": "exponential"}, detail=detail)
    assert (out["status"] == "ok").all()
    for row, item in zip(out.itertuples(), series, strict=True):
        estimates, errors = _decay_oracle(item)
        got = [getattr(row, f"est_{name}") for name in ("y0", "plateau", "k")]
        np.testing.assert_allclose(got, estimates, rtol=1e-5)
        got = [getattr(row, f"se_{name}") for name in ("y0", "plateau", "k")]
        np.testing.assert_allclose(got, errors, rtol=1e-4)


def test_long_frame_rows_without_id_are_refused_before_sending(api):
    # A row without an id has no series to go to: the service's own frame and table entries
    # refuse it naming the row (service.core.batch.columnar), so the client does too.
    from curvewise_client import InputError

    long = pd.DataFrame({"id": ["a"] * 4 + [None] + ["b"] * 4,
                         "x": [1.0, 2, 3, 4, 5] + [1, 2, 3, 4],
                         "y": [1.0, 2, 3, 5, 9] + [2, 3, 5, 6]})
    with pytest.raises(InputError, match="row 4"):
        frames.fit_long_frame(api, long, model={"degree": 1})
