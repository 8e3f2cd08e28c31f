"""Client.batch_frame: a pandas DataFrame or pyarrow Table sent as Arrow, a tidy frame back.

Oracles: statsmodels OLS for each series (seeded random data), and the service's in-process
``fit_frame`` for the whole tidy frame (the Arrow answer has exactly its columns). The
client itself imports nothing from the server; the test does, for the reference.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pyarrow as pa
import pytest
import statsmodels.api as sm
from curvewise_client import CurvewiseError, UnprocessableInput, frames
from curvewise_client.arrow import TableInputError

from service.core import ModelSpec
from service.core.batch.frames import fit_frame


def _long(count: int, seed: int = 21, *, int_ids: bool = False) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    parts = []
    for i in range(count):
        n = 10 + i % 7
        x = np.sort(rng.uniform(0, 10, n))
        y = 1.0 + 0.3 * i + 0.7 * x + rng.normal(0, 0.4, n)
        parts.append(pd.DataFrame({"probe": 500 + i if int_ids else f"p{i:04d}",
                                   "ref": x, "reading": y, "w": rng.uniform(0.5, 2.0, n)}))
    frame = pd.concat(parts, ignore_index=True)
    order = np.random.default_rng(seed + 1).permutation(len(frame))
    if int_ids:   # grouped by id, each series' points in a shuffled order (kept as sent)
        return frame.iloc[order].sort_values("probe", kind="stable").reset_index(drop=True)
    return frame


def _ols(group, weights=None):
    design = sm.add_constant(group["ref"].to_numpy())
    if weights is None:
        return sm.OLS(group["reading"].to_numpy(), design).fit().params
    return sm.WLS(group["reading"].to_numpy(), design, weights=weights).fit().params


@pytest.mark.parametrize("int_ids", [False, True])
def test_batch_frame_of_a_dataframe_equals_ols_and_the_in_process_frame(inprocess_client,
                                                                         int_ids):
    frame = _long(30, int_ids=int_ids)
    out = inprocess_client.batch_frame(frame, id="probe", x="ref", y="reading",
                                       model={"degree": 1})
    assert list(out["probe"]) == list(pd.unique(frame["probe"]))
    assert (out["status"] == "ok").all() and out.attrs["summary"]["ok"] == 30
    for row, (_, group) in zip(out.itertuples(), frame.groupby("probe", sort=False),
                               strict=True):
        np.testing.assert_allclose([row.coef_0, row.coef_1], _ols(group), rtol=1e-9)
    expected = fit_frame(frame, id="probe", x="ref", y="reading", model=ModelSpec(degree=1))
    pd.testing.assert_frame_equal(out, expected)


def test_batch_frame_of_an_arrow_table_with_weights_shuffled_and_a_bad_series(api):
    frame = _long(12, seed=4)
    frame.loc[frame["probe"] == "p0003", "ref"] = 5.0     # one distinct x: cannot fit a line
    rng = np.random.default_rng(9)
    shuffled = frame.iloc[rng.permutation(len(frame))]
    shuffled = shuffled.assign(ref=shuffled.groupby("probe")["ref"].transform(
        lambda s: np.sort(s.to_numpy())))   # rows shuffled; each series' x still ascending
    table = pa.Table.from_pandas(shuffled, preserve_index=False)
    out = api.batch_frame(table, id="probe", x="ref", y="reading", weight="w",
                          model={"degree": 1}, options={"level": 0.9})
    assert list(out["probe"]) == list(pd.unique(shuffled["probe"]))
    bad = out.set_index("probe").loc["p0003"]
    assert bad["status"] == "error" and bad["error_code"] == "insufficient_design"
    assert pd.isna(bad["coef_0"]) and out.attrs["summary"]["error"] == 1
    for row in out[out["status"] == "ok"].itertuples():
        group = shuffled[shuffled["probe"] == row.probe]
        np.testing.assert_allclose([row.coef_0, row.coef_1],
                                   _ols(group, group["w"].to_numpy()), rtol=1e-9)


def test_tidy_frames_from_json_batches_have_the_arrow_names(inprocess_client):
    frame = _long(6, seed=2)
    series = frames.series_from_long_frame(frame, id="probe", x="ref", y="reading")
    series.append({"id": "flat", "x": [2.0, 2.0, 2.0], "y": [1.0, 2.0, 3.0]})
    tidy = frames.batch_frame(inprocess_client.batch(series, model={"degree": 1}))
    arrow = inprocess_client.batch_frame(frame, id="probe", x="ref", y="reading",
                                         model={"degree": 1})
    assert "flags" not in tidy.columns and "estimate" not in tidy.columns
    for name in ("coef_0", "coef_1", "se_1", "sigma", "shapiro_wilk_p", "flag_codes"):
        np.testing.assert_array_equal(tidy[name].to_numpy()[:6], arrow[name].to_numpy())
    assert tidy.iloc[-1]["error_code"] == "insufficient_design"
    for name in tidy.columns:
        assert not any(isinstance(v, (tuple, list, dict)) for v in tidy[name]), name


def test_tidy_frames_of_full_reports_match_the_summary_ones(inprocess_client):
    frame = _long(5, seed=6)
    series = frames.series_from_long_frame(frame, id="probe", x="ref", y="reading")
    model = {"max_degree": 3, "select": "bic"}
    summary = frames.batch_frame(inprocess_client.batch(series, model=model))
    full = frames.batch_frame(inprocess_client.batch(series, model=model, detail="full"))
    shared = [c for c in summary.columns if c in full.columns and c not in ("id", "status")]
    assert {"coef_0", "coef_1", "se_1", "sigma", "durbin_watson_p", "lack_of_fit_p",
            "flag_codes", "n_outliers"} <= set(shared)
    assert {"rss", "aic", "bic"} <= set(full.columns)           # only full reports have them
    pd.testing.assert_frame_equal(full[shared], summary[shared], check_dtype=False,
                                  rtol=1e-9)


def test_bad_input_fails_before_sending_and_bad_options_come_back_as_422(inprocess_client):
    frame = _long(3)
    with pytest.raises(TableInputError, match="no column 'y'"):
        inprocess_client.batch_frame(frame, id="probe", x="ref")
    with pytest.raises(CurvewiseError):
        inprocess_client.batch_frame([1, 2, 3], id="probe", x="ref", y="reading")
    with pytest.raises(UnprocessableInput) as info:
        inprocess_client.batch_frame(frame, id="probe", x="ref", y="reading",
                                     model={"degree": -1})
    assert "options.model.degree" in info.value.field_errors
