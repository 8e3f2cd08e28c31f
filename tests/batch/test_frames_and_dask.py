"""Long-format pandas entry and Dask on a 2-worker LocalCluster equal the in-process batch.

The in-process reference is :func:`service.core.batch.driver.fit_batch` (checked against
fit_series and statsmodels in the other batch tests). The Dask test is bounded:
a small cluster on 127.0.0.1, a timeout, and a few hundred series.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from service.core import ModelSpec
from service.core.batch.driver import fit_batch
from service.core.batch.frames import fit_frame
from service.core.errors import DataError
from tests.batch.conftest import ragged_series

MODEL = ModelSpec(max_degree=3, select="bic")


def _long_frame(count=200, seed=12):
    parts = []
    for i, (x, y, _) in enumerate(ragged_series(seed, count)):
        parts.append(pd.DataFrame({"id": f"lot-{i:04d}", "x": x, "y": y}))
    frame = pd.concat(parts, ignore_index=True)
    frame.loc[frame.index[frame["id"] == "lot-0005"][2], "y"] = np.nan   # one faulty series
    return frame


def test_pandas_entry_equals_in_process_batch():
    frame = _long_frame()
    got = fit_frame(frame, model=MODEL)
    groups = [(g["x"].to_numpy(), g["y"].to_numpy()) for _, g in frame.groupby("id", sort=False)]
    ref = fit_batch(groups, model=MODEL)
    assert list(got["id"]) == list(frame["id"].unique())
    assert list(got["status"] == "ok") == list(ref.ok)
    assert got.loc[5, "status"] == "error" and got.loc[5, "error_code"] == "invalid_data"
    assert got.loc[5, "error_field"] == "y[2]"
    ok = ref.ok
    np.testing.assert_array_equal(got["coef_1"].to_numpy()[ok], ref.coefficients[ok, 1])
    np.testing.assert_array_equal(got["se_0"].to_numpy()[ok], ref.std_errors[ok, 0])
    np.testing.assert_array_equal(got["sigma"].to_numpy()[ok], ref.columns["sigma"][ok])
    codes = [tuple(c.split(";")) if c else () for c in got["flag_codes"][ok]]
    assert codes == [ref.flag_codes(i) for i in np.flatnonzero(ok)]
    levels = [tuple(s.split(";")) if s else () for s in got["flag_severities"][ok]]
    pairs = [tuple(zip(c, s, strict=True)) for c, s in zip(codes, levels, strict=True)]
    assert pairs == [ref.flag_severities(i) for i in np.flatnonzero(ok)]
    for i, found in zip(np.flatnonzero(ok), levels, strict=True):   # the most severe, or none
        assert got.loc[i, "severity"] == next(
            (s for s in ("serious", "caution", "info") if s in found), "none")
    assert pd.isna(got.loc[5, "severity"])   # the error row


def test_frames_are_tidy_one_scalar_per_cell():
    frame = _long_frame(30)
    got = fit_frame(frame, model=MODEL)
    assert "flags" not in got.columns      # pandas' DataFrame.flags would shadow it
    powers = [f"coef_{k}" for k in range(4)] + [f"se_{k}" for k in range(4)]
    assert set(powers) <= set(got.columns)
    assert {"shapiro_wilk_p", "breusch_pagan_p", "durbin_watson_p", "lack_of_fit_p"} <= set(
        got.columns)
    for name in got.columns:
        assert not any(isinstance(v, (tuple, list, dict, np.ndarray)) for v in got[name]), name
    # coef_k multiplies x^k: beyond a row's degree it is missing, up to it present
    ok = (got["status"] == "ok").to_numpy()
    degree = got["degree"].to_numpy(dtype=float, na_value=np.nan)
    for k in range(4):
        have = got[f"coef_{k}"].notna().to_numpy()
        np.testing.assert_array_equal(have[ok], (k <= degree)[ok])
    no_intercept = fit_frame(frame, model=ModelSpec(degree=2, intercept=False))
    assert no_intercept["coef_0"].isna().all() and no_intercept["coef_2"].notna().any()


def test_pandas_entry_with_weights_and_text_values():
    frame = _long_frame(20)
    frame["w"] = 1.0 + (np.arange(len(frame)) % 3)
    frame["y"] = frame["y"].astype(object)
    frame.loc[0, "y"] = "n/a"               # not a number: a missing value of lot-0000
    got = fit_frame(frame, weight="w", model=MODEL)
    assert got.loc[0, "status"] == "error" and got.loc[0, "error_field"] == "y[0]"
    assert list(np.flatnonzero(got["status"] != "ok")) == [0, 5]   # lot-0005 has a NaN


@pytest.mark.timeout(60)
def test_dask_on_a_local_cluster_equals_in_process():
    dd = pytest.importorskip("dask.dataframe")
    distributed = pytest.importorskip("distributed")
    frame = _long_frame(300, seed=13)
    ref = fit_frame(frame, model=MODEL)
    from service.core.batch.dask_support import fit_dask

    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                                  host="127.0.0.1", dashboard_address=None) as cluster, \
            distributed.Client(cluster) as dask_client:
        ddf = dd.from_pandas(frame, npartitions=6)
        got = fit_dask(ddf, model=MODEL).compute()
        assert len(dask_client.scheduler_info()["workers"]) == 2
    got = got.sort_values("id").reset_index(drop=True)
    ref = ref.sort_values("id").reset_index(drop=True)
    pd.testing.assert_frame_equal(got, ref, check_dtype=False)


@pytest.mark.timeout(60)
def test_dask_results_write_to_parquet_as_the_docs_show(tmp_path):
    # docs/scaling.md, "Large offline jobs: Dask": read points from Parquet, fit_dask,
    # results.to_parquet; here on dask's synchronous scheduler instead of a cluster
    dd = pytest.importorskip("dask.dataframe")
    dask = pytest.importorskip("dask")
    from service.core.batch.dask_support import fit_dask

    frame = _long_frame(60, seed=14)
    (tmp_path / "points").mkdir()
    frame.iloc[: len(frame) // 2].to_parquet(tmp_path / "points" / "part-0.parquet")
    frame.iloc[len(frame) // 2:].to_parquet(tmp_path / "points" / "part-1.parquet")
    with dask.config.set(scheduler="synchronous"):
        points = dd.read_parquet(str(tmp_path / "points" / "*.parquet"))
        results = fit_dask(points, id="id", x="x", y="y", model=ModelSpec(max_degree=4))
        results.to_parquet(str(tmp_path / "fits"))
    back = pd.read_parquet(tmp_path / "fits").sort_values("id").reset_index(drop=True)
    ref = fit_frame(frame, model=ModelSpec(max_degree=4)).sort_values("id").reset_index(
        drop=True)
    assert len(back) == 60 and (back["status"] == "error").sum() == 1   # lot-0005 has a NaN
    pd.testing.assert_frame_equal(back, ref, check_dtype=False)


def test_arrow_stream_in_chunks_equals_fit_frame(tmp_path):
    # docs/scaling.md, "Streaming a long Arrow stream or file": an IPC stream on disk fitted
    # chunk by chunk into a Parquet file; series cut across record batches and chunks
    pa = pytest.importorskip("pyarrow")
    import pyarrow.parquet as pq

    from service.core.batch.arrow_stream import fit_arrow_stream

    frame = _long_frame(45, seed=15)
    table = pa.Table.from_pandas(frame, preserve_index=False)
    with pa.OSFile(str(tmp_path / "points.arrows"), "wb") as sink, \
            pa.ipc.new_stream(sink, table.schema) as writer:
        writer.write_table(table, max_chunksize=113)     # record batches cut series apart
    with pa.memory_map(str(tmp_path / "points.arrows")) as source:
        reader = pa.ipc.open_stream(source)
        writer, chunks = None, 0
        for results in fit_arrow_stream(reader, model=MODEL, chunk_series=7):
            # 7 series, plus at most the runs of one record batch (113 rows, series >= 20)
            assert results.num_rows <= 7 + 113 // 20 + 1
            chunks += 1
            writer = writer or pq.ParquetWriter(str(tmp_path / "fits.parquet"), results.schema)
            writer.write_table(results)
        writer.close()
    assert chunks >= 4
    back = pq.read_table(tmp_path / "fits.parquet").to_pandas(
        types_mapper={pa.int64(): pd.Int64Dtype()}.get)
    pd.testing.assert_frame_equal(back, fit_frame(frame, model=MODEL))


@pytest.mark.parametrize("model", [MODEL, ModelSpec(family="exponential")])
def test_a_row_without_id_is_named_not_a_numpy_error(model):
    # Expected behaviour from the Arrow body of /v1/batch (service.core.batch.columnar), which
    # refuses a null id the same way: a DataError naming the id column and the first such row.
    frame = _long_frame(6)
    frame["id"] = frame["id"].astype(object)
    frame.loc[7, "id"] = None
    with pytest.raises(DataError) as caught:
        fit_frame(frame, model=model)
    assert caught.value.field == "id"
    assert "Row 7" in caught.value.message and "non-null id" in caught.value.fix
