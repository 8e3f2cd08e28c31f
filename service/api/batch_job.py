"""One batch request's shared options, checked against the limits, and its results in order.

Used by the JSON and the NDJSON forms of ``/v1/batch`` (:mod:`service.api.batch`,
:mod:`service.api.batch_stream`).
"""

from __future__ import annotations

import gc
from collections import Counter
from contextlib import contextmanager

import numpy as np
from marshmallow import ValidationError

from schemas.batch_curves import curve_summary_rows
from schemas.batch_series import load_series, valid_id
from schemas.batch_summary import summary_rows
from service.api.batch_curves import curve_results, is_nonlinear, mixed_results
from service.core.batch.columnar import FlatSeries, fit_flat
from service.core.batch.curves_results import CurveBatchResult
from service.core.batch.driver import fit_batch, fit_many
from service.core.checks.known_sd import KNOWN_SD, require_weights
from service.core.errors import FitError
from service.core.polynomial.design import term_names
from service.core.spec import HARD_MAX_DEGREE, FitOptions
from service.http.errors import (
    ServiceLimitError,
    agreed_code,
    coded_detail,
    fit_error_body,
    flatten_errors,
    problem_body,
)
from service.http.limits import check_degree, check_grid
from service.http.reporting import fit_response
from service.http.requests import grid_spec, model_spec
from service.runtime.observability import record_fit_failure

SEVERITY_ORDER = ("serious", "caution", "info")   # most severe first
FULL_INCLUDE = ("coefficients", "anova", "statistics", "selection", "diagnostics",
                "fitted_model")


class BatchJob:
    """Shared options of one batch request, checked against this server's limits."""

    def __init__(self, envelope: dict, settings):
        self.settings = settings
        self.detail = envelope["detail"]
        self.model = model_spec(envelope["model"])
        check_degree(envelope["model"], settings, "model.")
        include = envelope.get("include") or FULL_INCLUDE
        self.include = tuple(include)
        grid = envelope.get("grid")
        if grid is not None:  # shared by every series: over the limit is the request's fault
            check_grid(grid, settings)
        self.options = FitOptions(
            level=envelope["level"], missing=envelope["missing"],
            grid=grid_spec(grid) if grid is not None else None,
            include=frozenset(include) | ({"grid"} if grid is not None else set()),
            max_grid_points=settings.max_grid_points,
            max_degree=min(settings.max_degree, HARD_MAX_DEGREE),
            weighting=envelope["weighting"])
        self.known_sd = envelope["weighting"] == KNOWN_SD
        # flat (the metrics reader takes the summary as one flat object): the series by
        # their most severe flag; flagged = serious + caution
        self.counts = {"ok": 0, "error": 0, "flagged": 0, "serious": 0, "caution": 0, "info": 0}

    def results(self, items):
        """``items``: (id, series tuple or error body). Returns result dicts in order."""
        if is_nonlinear(self.model) or any(isinstance(s, tuple) and s[3] is not None and
                                           is_nonlinear(s[3]) for _, s in items):
            return mixed_results(self, items)   # nonlinear models: service.api.batch_curves
        return self.polynomial_results(items)

    def polynomial_results(self, items):
        """:meth:`results` for items whose models are all polynomial."""
        fit_idx = [i for i, (_, s) in enumerate(items) if isinstance(s, tuple)]
        batch = fit_batch([items[i][1] for i in fit_idx], model=self.model,
                          models=[items[i][1][3] for i in fit_idx], options=self.options,
                          detail=self.detail)
        return self._assemble(items, fit_idx, batch)

    def error_results(self, items):
        """Result dicts for ``(id, problem body)`` items, counted like fitted ones."""
        out = [{"id": ident, "status": "error", "error": body} for ident, body in items]
        self.counts["error"] += len(out)
        for code, count in Counter(body.get("code") for _, body in items).items():
            record_fit_failure(code, count)
        return out

    def plain_results(self, ids, x, y, lengths):
        """Results for series already in flat arrays
        (:func:`schemas.batch_series.load_plain_series`)."""
        if is_nonlinear(self.model):     # service.api.batch_curves
            return curve_results(self, ids, x, y, lengths, None, self.model)
        batch = fit_many(x, y, lengths, model=self.model, options=self.options,
                         detail=self.detail)
        return self._assemble([(ident, ()) for ident in ids], range(len(ids)), batch)

    def fit_flat(self, flat: FlatSeries):
        """The columnar result of series held in flat arrays: the one call the Arrow and
        Parquet bodies make (:func:`service.core.batch.columnar.fit_flat`)."""
        return fit_flat(flat, model=self.model, options=self.options, detail=self.detail)

    def flat_results(self, ids, flat: FlatSeries, refused=None):
        """Result dicts for ``ids`` in order: the series of ``flat`` fitted, and the
        ``refused`` ones (position -> problem body, not in ``flat``) as errors."""
        refused = refused or {}
        items = [(ident, refused.get(i, ())) for i, ident in enumerate(ids)]
        fit_idx = [i for i in range(len(ids)) if i not in refused]
        return self._assemble(items, fit_idx, self.fit_flat(flat))

    def _assemble(self, items, fit_idx, batch):
        ok_rows = np.flatnonzero(batch.ok).tolist()
        bodies = dict(zip(ok_rows, self._fits(batch, ok_rows), strict=True))
        return self.assemble(items, fit_idx, bodies, batch.errors)

    def assemble(self, items, fit_idx, bodies, errors):
        """Result dicts in order: ``items`` ((id, problem body or anything)) whose position
        is not in ``fit_idx`` are those errors; fitted row ``j`` is ``bodies[j]`` or its error
        ``errors[j]``. Counts, flag counts and failure metrics are updated."""
        out = []
        pos = {i: j for j, i in enumerate(fit_idx)}
        for i, (ident, series) in enumerate(items):
            j = pos.get(i)
            if j is None:
                out.append({"id": ident, "status": "error", "error": series})
            elif j in bodies:
                fit = bodies[j]
                self.count_flags(fit.get("flags") or ())
                out.append({"id": ident, "status": "ok", "fit": fit})
            else:
                out.append({"id": ident, "status": "error",
                            "error": fit_error_body(errors[j])})
        self.counts["ok"] += len(bodies)
        self.counts["error"] += len(items) - len(bodies)
        reasons = Counter(r["error"].get("code") for r in out if r["status"] == "error")
        for code, count in reasons.items():
            record_fit_failure(code, count)
        return out

    def count_flags(self, flags) -> None:
        """Count one fitted series by its most severe flag (caution or serious: flagged)."""
        found = {flag["severity"] for flag in flags}
        worst = next((s for s in SEVERITY_ORDER if s in found), None)
        if worst is not None:
            self.counts[worst] += 1
            self.counts["flagged"] += worst != "info"

    def _fits(self, batch, rows):
        if self.detail == "full":
            return [fit_response(batch.reports[j], self.include) for j in rows]
        if isinstance(batch, CurveBatchResult):   # a nonlinear model (Arrow and Parquet bodies)
            return curve_summary_rows(batch, rows, known_sd=self.known_sd)
        return summary_rows(batch, rows, term_names, known_sd=self.known_sd)

    def series(self, obj, position: int):
        """(id, (x, y, w, ModelSpec|None)) or (id, problem body) for one series object."""
        ident = obj.get("id", position) if isinstance(obj, dict) else position
        if not valid_id(ident):
            ident = position   # an invalid id is not echoed back: the result has a valid one
        try:
            ident, x, y, w, model = load_series(obj, position)
        except ValidationError as exc:
            errors, agreed = flatten_errors(exc.messages), agreed_code(exc.messages)
            return ident, problem_body(422, None, coded_detail(errors) if agreed else
                                       "This series is not valid; see errors for each field "
                                       "and its fix.", errors=errors,
                                       code=agreed or "validation_error")
        if x.size > self.settings.max_points:
            return ident, problem_body(413, None, f"The series has {x.size} points; the limit "
                                       f"is {self.settings.max_points}. Split the series.",
                                       errors={"x": ["Too many points."]},
                                       code="too_many_points")
        if model is not None:
            try:
                check_degree(model, self.settings, "model.")
            except ServiceLimitError as exc:
                return ident, problem_body(exc.status, None, exc.message,
                                           errors={exc.field: [exc.message]}, code=exc.code)
            model = model_spec(model)
        try:   # known SDs without weights: this series' error, as /v1/fit gives it
            require_weights(self.options.weighting, w)
        except FitError as exc:
            return ident, fit_error_body(exc)
        return ident, (x, y, w, model)


@contextmanager
def gc_paused():
    """Pause the cyclic garbage collector while many small result objects are built.

    A batch builds hundreds of thousands of lists and dicts, none of them in
    reference cycles; each automatic collection would walk all of them (and the
    decoded request) again. Reference counting still frees them; collection
    resumes afterwards.
    """
    was_enabled = gc.isenabled()
    gc.disable()
    try:
        yield
    finally:
        if was_enabled:
            gc.enable()
