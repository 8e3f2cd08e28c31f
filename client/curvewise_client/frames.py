"""pandas helpers: results as DataFrames, and batches straight from a long-format frame.

Needs the ``pandas`` extra (``pip install "curvewise-client[pandas]"``); the rest
of the client never imports pandas.

    frames.anova_frame(fit)                    # one row per term
    frames.batch_frame(client.batch(series))   # one row per series
    frames.fit_long_frame(client, df, id="probe", x="reference", y="reading",
                          model={"max_degree": 3, "select": "bic"})
"""

from __future__ import annotations

from collections.abc import Iterable, Mapping
from dataclasses import asdict, fields
from typing import Any

from curvewise_client.results import BatchItem, BatchResult, Estimates, FitResult, Predictions


def _pandas():
    try:
        import pandas
    except ImportError as exc:  # pragma: no cover - depends on the environment
        raise ImportError('pandas helpers need pandas: pip install "curvewise-client[pandas]"'
                          ) from exc
    return pandas


def _records(rows: Iterable[Any]) -> list[dict[str, Any]]:
    return [{f.name: getattr(row, f.name) for f in fields(row)} for row in rows]


def coefficients_frame(fit: FitResult):
    """Coefficients (raw x scale) with standard errors, t, p and confidence limits."""
    return _pandas().DataFrame(_records(fit.coefficients)).set_index("term")


def anova_frame(fit: FitResult):
    """The sequential table, residual row last (``f``/``p_value`` missing there)."""
    return _pandas().DataFrame(_records(fit.anova)).set_index("term")


def candidates_frame(fit: FitResult):
    """The selection trail: one row per candidate degree, every criterion."""
    if fit.selection is None:
        raise ValueError("this fit carries no selection section")
    return _pandas().DataFrame(_records(fit.selection.candidates)).set_index("degree")


def grid_frame(fit: FitResult):
    """The curve and its bands on the grid, one row per grid x."""
    if fit.grid is None:
        raise ValueError("this fit carries no grid (grid was null or excluded)")
    columns = {k: v for k, v in asdict(fit.grid).items() if isinstance(v, tuple) and v}
    return _pandas().DataFrame(columns)


def predictions_frame(result: Predictions):
    """Predictions with their bands, one row per new x."""
    return _pandas().DataFrame(_records(result.predictions))


def estimates_frame(result: Estimates):
    """x read back from y, with limits and status, one row per reading."""
    return _pandas().DataFrame(_records(result.estimates))


def batch_frame(results: BatchResult | Iterable[BatchItem]):
    """One row per series: id, status, the summary fit's scalar members, or the error detail.

    List-valued members (coefficients...) stay in cells as tuples.
    """
    items = results.results if isinstance(results, BatchResult) else list(results)
    rows = []
    for item in items:
        row: dict[str, Any] = {"id": item.id, "status": item.status}
        if item.fit is not None:
            row.update({k: _cell(v) for k, v in item.fit.items()})
        if item.error is not None:
            row["error"] = item.error.get("detail")
            row["error_code"] = item.error.get("code")
        rows.append(row)
    return _pandas().DataFrame(rows)


def _cell(value: Any) -> Any:
    if isinstance(value, Mapping):
        return dict(value)
    return value


def series_from_long_frame(frame, *, id: str = "id", x: str = "x", y: str = "y",
                           weight: str | None = None) -> list[dict[str, Any]]:
    """Series objects for :meth:`Client.batch` from a long frame (one row per point)."""
    series = []
    for key, group in frame.groupby(id, sort=False):
        item = {"id": key.item() if hasattr(key, "item") else key,
                "x": group[x].tolist(), "y": group[y].tolist()}
        if weight is not None:
            item["weights"] = group[weight].tolist()
        series.append(item)
    return series


def fit_long_frame(client, frame, *, id: str = "id", x: str = "x", y: str = "y",
                   weight: str | None = None, stream: bool = False, **options: Any):
    """Fit every series of a long frame with one batch call; one result row per series.

    ``stream=True`` sends NDJSON and reads results as they come (for large frames).
    """
    series = series_from_long_frame(frame, id=id, x=x, y=y, weight=weight)
    if stream:
        with client.batch_stream(iter(series), **options) as results:
            return batch_frame(list(results))
    return batch_frame(client.batch(series, **options))
