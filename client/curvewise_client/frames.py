"""pandas helpers: results as DataFrames, and batches straight from a long-format frame.

Needs the ``pandas`` extra (``pip install "curvewise-client[pandas]"``); the rest
of the client never imports pandas.

    frames.anova_frame(fit)                    # one row per term
    frames.batch_frame(client.batch(series))   # one row per series, tidy
    frames.fit_long_frame(client, df, id="probe", x="reference", y="reading",
                          model={"max_degree": 3, "select": "bic"})
"""

from __future__ import annotations

from collections.abc import Iterable, Mapping
from dataclasses import asdict, fields
from typing import Any

from curvewise_client.errors import InputError
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
    """The candidates compared: one row per polynomial degree of the selection trail, or one
    per model of a ``model.candidates`` comparison (by ``label``), every criterion."""
    if fit.selection is not None:
        return _pandas().DataFrame(_records(fit.selection.candidates)).set_index("degree")
    if fit.comparison is not None:
        return _pandas().DataFrame(_records(fit.comparison.candidates)).set_index("label")
    raise ValueError("this fit compared no candidates: ask for a polynomial degree selection "
                     "(max_degree with select) or list models under model.candidates")


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


_SCALARS = ("n", "degree", "df_residual", "sigma", "r_squared", "adj_r_squared", "rss", "aic",
            "aicc", "bic", "press")
_TESTS = ("shapiro_wilk_p", "breusch_pagan_p", "durbin_watson", "durbin_watson_p",
          "lack_of_fit_p", "chi_square_fit_p")
_FLAGS = ("flag_codes", "flag_severities", "severity")
_ERRORS = ("error_code", "error_field", "error")
_WORST_FIRST = ("serious", "caution", "info")


def batch_frame(results: BatchResult | Iterable[BatchItem]):
    """One row per series, one scalar per cell (as :meth:`Client.batch_frame` answers).

    Columns: ``id``, ``status``; the fit's numbers (``n``, ``degree``, ``df_residual``,
    ``sigma``, ``r_squared``, ``adj_r_squared``, and with ``detail="full"`` also ``rss``,
    ``aic``, ``aicc``, ``bic``, ``press``); the residual tests (``shapiro_wilk_p``,
    ``breusch_pagan_p``, ``durbin_watson``, ``durbin_watson_p``, ``lack_of_fit_p``,
    ``chi_square_fit_p``: the goodness-of-fit test with weighting ``known_sd``, else None);
    ``n_outliers``; ``coef_k`` and ``se_k`` for each power ``k`` of x (nonlinear families:
    ``est_<parameter>`` and ``se_<parameter>``, as the service's tidy tables); ``flag_codes`` and
    ``flag_severities`` (``;``-joined, same order) and ``severity`` (the most severe, or
    ``none``); ``error_code``, ``error_field`` (``;``-joined field paths) and ``error``.
    Missing values are None/NaN.
    """
    items = results.results if isinstance(results, BatchResult) else list(results)
    rows = [_tidy_row(item) for item in items]
    powers = sorted({int(k[5:]) for row in rows for k in row if k.startswith("coef_")})
    names = list(dict.fromkeys(k[4:] for row in rows for k in row if k.startswith("est_")))
    present = {k for row in rows for k in row}
    order = (["id", "status"] + [c for c in (*_SCALARS, *_TESTS, "n_outliers") if c in present]
             + [f"coef_{k}" for k in powers] + [f"se_{k}" for k in powers]
             + [f"est_{name}" for name in names] + [f"se_{name}" for name in names]
             + [*_FLAGS, *_ERRORS])
    return _pandas().DataFrame(rows, columns=order)


def _power(term: str) -> int:
    return 0 if term == "intercept" else 1 if term == "x" else int(term.split("^", 1)[1])


def _tidy_row(item: BatchItem) -> dict[str, Any]:
    row: dict[str, Any] = {"id": item.id, "status": item.status}
    fit = item.fit
    if fit is not None:
        if "coefficients" in fit:                       # detail="full": a /v1/fit report
            stats = fit.get("statistics") or {}
            row.update(n=fit.get("n"), degree=(fit.get("model") or {}).get("degree"))
            row.update({k: stats.get(k) for k in _SCALARS if k in stats})
            diagnostics = fit.get("diagnostics") or {}
            row.update(dict.fromkeys(_TESTS))
            for test in diagnostics.get("tests") or ():
                if test["name"] == "durbin_watson":
                    row["durbin_watson"] = test.get("statistic")
                row[f"{test['name']}_p"] = test.get("p_value")
            lack = diagnostics.get("lack_of_fit")
            if isinstance(lack, Mapping):
                row["lack_of_fit_p"] = lack.get("p_value")
            if "outliers" in diagnostics:
                row["n_outliers"] = len(diagnostics["outliers"] or ())
            terms = [(c["term"], c["estimate"], c["std_error"]) for c in fit["coefficients"]]
            polynomial = (fit.get("model") or {}).get("family", "polynomial") == "polynomial"
        else:                                           # the compact summary
            row.update({k: fit.get(k) for k in _SCALARS if k in fit})
            row.update({k: (fit.get("tests") or {}).get(k) for k in _TESTS})
            row["n_outliers"] = len(fit.get("outliers") or ())
            polynomial = "parameters" not in fit          # nonlinear: named parameters
            terms = list(zip(fit.get("terms") or fit.get("parameters") or (),
                             fit.get("estimate") or (), fit.get("std_error") or (),
                             strict=False))
        for term, estimate, std_error in terms:
            key = _power(term) if polynomial else term
            row[f"{'coef' if polynomial else 'est'}_{key}"] = estimate
            row[f"se_{key}"] = std_error
        flags = fit.get("flags") or ()
        row["flag_codes"] = ";".join(f["code"] for f in flags)
        row["flag_severities"] = ";".join(f["severity"] for f in flags)
        found = {f["severity"] for f in flags}
        row["severity"] = next((s for s in _WORST_FIRST if s in found), "none")
    if item.error is not None:
        fields_named = [k for k in (item.error.get("errors") or {}) if k != "_body"]
        row["error_code"] = item.error.get("code")
        row["error_field"] = ";".join(fields_named) or None
        row["error"] = item.error.get("detail")
    return row


def series_from_long_frame(frame, *, id: str = "id", x: str = "x", y: str = "y",
                           weight: str | None = None) -> list[dict[str, Any]]:
    """Series objects for :meth:`Client.batch` from a long frame (one row per point).

    Raises :class:`InputError` when a row has no id (None or NaN): it belongs to no series.
    """
    missing = frame[id].isna().to_numpy()
    if missing.any():
        row = int(missing.argmax())
        raise InputError(f"row {row} of the frame has no {id!r} (null): every row needs the id "
                         "of its series; fill or drop it before sending")
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
