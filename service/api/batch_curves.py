"""Batch requests with nonlinear models: series grouped by model, fitted by the curve engine.

:class:`service.api.batch_job.BatchJob` hands a batch here as soon as the shared
model or one series' own model is nonlinear. Polynomial series keep their own
path (``BatchJob.polynomial_results``); the nonlinear ones are grouped by model
and each group is fitted by
:func:`service.core.batch.curves.fit_many_curves` (every series on its own: a bad
one gets its error result). Results come back in request order.
"""

from __future__ import annotations

import numpy as np

from schemas.batch_curves import curve_summary_rows
from service.core.batch.curves import fit_many_curves
from service.core.data.inputs import check_pairs
from service.core.errors import DataError
from service.http.errors import fit_error_body
from service.http.reporting import fit_response
from service.runtime.observability import record_fit_failure


def is_nonlinear(model) -> bool:
    """True for a model the curve engine fits (anything but a polynomial)."""
    return model.family != "polynomial"


def mixed_results(job, items) -> list[dict]:
    """Result dicts in order for ``items`` ((id, series tuple or error body)) of ``job``."""
    out: list[dict | None] = [None] * len(items)
    polynomial, groups = [], {}
    for i, (_, series) in enumerate(items):
        if not isinstance(series, tuple):
            polynomial.append(i)          # an error body: the polynomial path reports it
            continue
        model = series[3] if series[3] is not None else job.model
        if is_nonlinear(model):
            try:   # the curve engine takes series back to back: their pairs must match
                check_pairs(*series[:3])
            except DataError as exc:
                out[i] = _error_result(job, items[i][0], exc)
                continue
            groups.setdefault(model, []).append(i)
        else:
            polynomial.append(i)
    if polynomial:
        done = job.polynomial_results([items[i] for i in polynomial])
        for i, result in zip(polynomial, done, strict=True):
            out[i] = result
    for model, rows in groups.items():
        series = [items[i][1] for i in rows]
        for i, result in zip(rows, group_results(job, [items[i][0] for i in rows], series,
                                                  model), strict=True):
            out[i] = result
    return out


def _error_result(job, ident, exc: DataError) -> dict:
    job.counts["error"] += 1
    record_fit_failure(exc.code, 1)
    return {"id": ident, "status": "error", "error": fit_error_body(exc)}


def group_results(job, ids, series, model) -> list[dict]:
    """Fit series ``(x, y, w, _)`` of one nonlinear model; result dicts in their order."""
    lengths = np.array([s[0].size for s in series], dtype=np.int64)
    def cat(parts):
        return np.concatenate(parts) if parts else np.empty(0)

    x, y = cat([s[0] for s in series]), cat([s[1] for s in series])
    weights = None
    if any(s[2] is not None for s in series):
        weights = cat([np.ones(s[0].size) if s[2] is None else s[2] for s in series])
    return curve_results(job, ids, x, y, lengths, weights, model)


def curve_results(job, ids, x, y, lengths, weights, model) -> list[dict]:
    """Fit flat series with one nonlinear model and write their result dicts."""
    result = fit_many_curves(x, y, lengths, weights, model=model, options=job.options,
                             detail=job.detail)
    ok_rows = np.flatnonzero(result.ok).tolist()
    if job.detail == "full":
        fits = [fit_response(result.reports[j], job.include) for j in ok_rows]
    else:
        fits = curve_summary_rows(result, ok_rows, known_sd=job.known_sd)
    bodies = dict(zip(ok_rows, fits, strict=True))
    return job.assemble([(ident, None) for ident in ids], range(len(ids)), bodies,
                        result.errors)
