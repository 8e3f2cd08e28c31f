"""A frozen core :class:`~service.core.results.FitReport` -> the /v1/fit response dict.

Names follow the wire contract (``schemas/fit_response.py`` documents every
field). Numbers stay numbers: NaN and infinities are written as JSON ``null``
by the JSON layer (orjson), numpy arrays go to it unconverted.
"""

from __future__ import annotations

from dataclasses import fields
from operator import attrgetter

from service.core.compare import Comparison
from service.core.families import family_of
from service.core.nonlinear.builtin.domain import curve_scale
from service.core.nonlinear.report import NonlinearReport
from service.core.results import FitReport, Prediction

ALWAYS = ("model", "n", "n_input", "dropped", "warnings", "flags")
_READERS: dict[type, tuple] = {}


def _reader(cls) -> tuple:
    """(field names, None) for a named tuple (its values are the tuple itself), or
    (field names, one attrgetter of them all) for a dataclass; built once per class."""
    names = getattr(cls, "_fields", None)
    if names is not None:
        reader = _READERS[cls] = (names, None)
        return reader
    names = tuple(f.name for f in fields(cls))
    get = attrgetter(*names)
    if len(names) == 1:  # attrgetter of one name returns the value, not a 1-tuple
        get = (lambda one: lambda obj: (one(obj),))(get)
    reader = _READERS[cls] = (names, get)
    return reader


def plain(obj) -> dict:
    """A flat result object as a dict (no deep copy: arrays are passed through)."""
    names, get = _READERS.get(type(obj)) or _reader(type(obj))
    # the names and the values come from the same class: equal lengths by construction (a
    # strict zip's own check costs a third of this call, run ~20 times an answer)
    return dict(zip(names, obj if get is None else get(obj), strict=False))


def plain_rows(rows) -> list[dict]:
    """A tuple of result rows as a list of dicts, as ``[plain(r) for r in rows]`` returns it.

    Rows of one named-tuple class (every table of a report) are converted inline, without a
    call of :func:`plain` per row (a few microseconds of every answer, over ~15 rows).
    """
    if not rows:
        return []
    cls = type(rows[0])
    names = getattr(cls, "_fields", None)
    if names is None:
        return [plain(row) for row in rows]
    return [dict(zip(names, row, strict=False)) if type(row) is cls else plain(row)
            for row in rows]


def fit_response(report: FitReport | NonlinearReport, include) -> dict:
    """The response for one fit, with the sections in ``include`` (an iterable of names)."""
    if isinstance(report, NonlinearReport):
        return nonlinear_response(report, include)
    fitted = report.model
    stats = report.statistics
    body = {
        "model": {"family": "polynomial", "degree": fitted.degree, "intercept": fitted.intercept,
                  "terms": list(fitted.terms), "transform_x": fitted.transform_x,
                  "transform_y": fitted.transform_y, "weighting": fitted.weighting},
        "n": stats.n,
        "n_input": report.n_input,
        "dropped": list(report.dropped),
    }
    wanted = set(include)
    if "coefficients" in wanted:
        body["coefficients"] = plain_rows(report.coefficients)
    if "anova" in wanted:
        body["anova"] = _anova_rows(report.anova)
    if "statistics" in wanted:
        body["statistics"] = plain(stats)
    if "selection" in wanted:
        selection = report.selection
        body["selection"] = {"method": selection.method,
                             "chosen_degree": selection.chosen_degree,
                             "reason": selection.reason, "alpha": selection.alpha,
                             "candidates": plain_rows(selection.candidates)}
    if "diagnostics" in wanted and report.diagnostics is not None:
        body["diagnostics"] = diagnostics_section(report.diagnostics)
    if "grid" in wanted:
        body["grid"] = None if report.grid is None else prediction_section(report.grid)
    body["warnings"] = plain_rows(report.warnings)
    body["flags"] = plain_rows(report.flags)
    if "fitted_model" in wanted:
        body["fitted_model"] = family_of(fitted).write_document(fitted)
    return body


def _anova_rows(rows) -> list[dict]:
    out = plain_rows(rows)
    for row in out:
        if row["term"] == "residual":  # no F test on the residual row
            row.pop("f", None)
            row.pop("p_value", None)
    return out


def prediction_section(prediction: Prediction) -> dict:
    """Grid/prediction arrays under their contract names (``unbounded`` all false when a
    family does not mark it)."""
    out = plain(prediction)
    del out["notices"]  # the report's warnings carry them
    if out["unbounded"] is None:
        out["unbounded"] = [False] * len(prediction.x)
    return out


def diagnostics_section(diagnostics) -> dict:
    """Diagnostics with nested tests and lack of fit as plain dicts."""
    out = plain(diagnostics)
    out["tests"] = plain_rows(diagnostics.tests)
    out["lack_of_fit"] = None if diagnostics.lack_of_fit is None else plain(
        diagnostics.lack_of_fit)
    out["thresholds"] = dict(diagnostics.thresholds)
    for key in ("outliers", "high_leverage", "influential"):
        out[key] = list(out[key])
    return out


def nonlinear_response(report: NonlinearReport, include) -> dict:
    """The response for a nonlinear family's fit: parameters by name, with profile limits,
    how the fit converged (``fit_info``) and the parameter correlations; no sequential
    ANOVA and no degree selection."""
    fitted = report.model
    body = {
        "model": {"family": fitted.family, "expression": fitted.expression,
                  "terms": list(fitted.parameter_names), "weighting": fitted.weighting},
        "n": report.statistics.n,
        "n_input": report.n_input,
        "dropped": list(report.dropped),
    }
    scale = curve_scale(fitted.family, fitted.expression)
    if scale is not None:  # a built-in curve: on log x or on x
        body["model"]["scale"] = scale
    wanted = set(include)
    if "coefficients" in wanted:
        body["coefficients"] = plain_rows(report.coefficients)
        body["correlation"] = report.correlation
        if report.derived:
            body["derived"] = [plain(d) for d in report.derived]
    if "statistics" in wanted:
        body["statistics"] = plain(report.statistics)
    body["fit_info"] = plain(report.fit_info)
    if "diagnostics" in wanted and report.diagnostics is not None:
        body["diagnostics"] = diagnostics_section(report.diagnostics)
    if "grid" in wanted:
        body["grid"] = None if report.grid is None else prediction_section(report.grid)
    body["warnings"] = plain_rows(report.warnings)
    body["flags"] = plain_rows(report.flags)
    if "fitted_model" in wanted:
        body["fitted_model"] = family_of(fitted).write_document(fitted)
    return body


def comparison_response(comparison: Comparison, include) -> dict:
    """The chosen candidate's full response, plus the comparison table and the reason."""
    body = fit_response(comparison.report, include)
    body["comparison"] = {
        "select": comparison.select, "alpha": comparison.alpha,
        "chosen": comparison.candidates[comparison.chosen].label,
        "chosen_index": comparison.chosen, "reason": comparison.reason,
        "candidates": plain_rows(comparison.candidates),
        "nested_tests": plain_rows(comparison.nested_tests)}
    return body
