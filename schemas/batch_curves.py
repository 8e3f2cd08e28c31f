"""POST /v1/batch with a nonlinear model: the compact per-series summary of a curve fit.

The names here are the wire contract of a nonlinear batch summary (NaN becomes
JSON null in the JSON layer); :func:`curve_summary_rows` writes them from the
core's columnar curve result.
"""

from __future__ import annotations

import numpy as np
from marshmallow import Schema, fields

_TESTS = ("shapiro_wilk_p", "breusch_pagan_p", "durbin_watson", "durbin_watson_p",
          "lack_of_fit_p")
_KNOWN_SD_TESTS = ("chi_square_fit", "chi_square_fit_p")
_WHOLE_FIT = ("sigma", "r_squared", "adj_r_squared", "rss", "aic", "aicc", "bic",
              "relative_offset")


def curve_summary_rows(result, rows, *, known_sd: bool = False) -> list[dict]:
    """Compact summaries of the fitted rows ``rows`` of a columnar curve result.

    ``result`` has ``family``, ``parameter_names``, ``estimates``, ``std_errors``,
    ``columns`` and ``flags_of(mask, levels)`` (the core's CurveBatchResult).
    ``known_sd`` (weighting ``known_sd``) adds the chi-square goodness-of-fit test to
    ``tests``.
    """
    rows = np.asarray(rows, dtype=np.int64)
    if rows.size == 0:
        return []
    c = result.columns
    names = list(result.parameter_names)
    whole = {name: c[name][rows].tolist() for name in _WHOLE_FIT}
    tests = {name: c[name][rows].tolist() for name in _TESTS + _KNOWN_SD_TESTS * known_sd}
    columns = zip(c["n"][rows].tolist(), c["df_residual"][rows].tolist(),
                  result.estimates[rows].tolist(), result.std_errors[rows].tolist(),
                  c["converged"][rows].tolist(), c["termination"][rows].tolist(),
                  c["start_strategy"][rows].tolist(), c["flags"][rows].tolist(),
                  c["flag_levels"][rows].tolist(), strict=True)
    out = []
    for j, (n, df, est, se, converged, termination, start, mask, levels) in enumerate(columns):
        body = {"family": result.family, "n": n, "parameters": names, "estimate": est,
                "std_error": se, "df_residual": df,
                **{name: values[j] for name, values in whole.items()},
                "converged": converged, "termination": termination, "start": start,
                "tests": {name: values[j] for name, values in tests.items()},
                "flags": [{"code": code, "severity": severity}
                          for code, severity in result.flags_of(mask, levels)]}
        out.append(body)
    return out


class CurveSummarySchema(Schema):
    """Compact result of one series fitted with a nonlinear family (detail=summary).
    Undefined numbers are null."""

    family = fields.String(metadata={"description": "The model family fitted."})
    n = fields.Integer(metadata={"description": "Points used."})
    parameters = fields.List(fields.String(), metadata={
        "description": "Parameter names, in the order of estimate and std_error."})
    estimate = fields.List(fields.Float(allow_none=True), metadata={
        "description": "Least-squares estimates (equal to a single /v1/fit of the series)."})
    std_error = fields.List(fields.Float(allow_none=True), metadata={
        "description": "Their tangent-plane standard errors."})
    df_residual = fields.Integer()
    sigma = fields.Float(allow_none=True, metadata={"description": "Residual standard deviation."})
    r_squared = fields.Float(allow_none=True, metadata={
        "description": "For orientation only: not a basis for judging a nonlinear fit."})
    adj_r_squared = fields.Float(allow_none=True)
    rss = fields.Float(allow_none=True, metadata={"description": "Weighted residual sum of "
                                                                "squares."})
    aic = fields.Float(allow_none=True)
    aicc = fields.Float(allow_none=True)
    bic = fields.Float(allow_none=True)
    relative_offset = fields.Float(allow_none=True, metadata={
        "description": "Bates & Watts convergence criterion at the estimates."})
    converged = fields.Boolean()
    termination = fields.String(metadata={"description": "Why the solver stopped (as "
                                                         "fit_info.termination of /v1/fit)."})
    start = fields.String(metadata={"description": "The automatic start the fit came from "
                                                   "(shape, grid_best, ...), or given."})
    tests = fields.Dict(metadata={"description": "shapiro_wilk_p, breusch_pagan_p, "
                                                 "durbin_watson, durbin_watson_p, lack_of_fit_p "
                                                 "(null if not computed); with weighting "
                                                 "known_sd also chi_square_fit (the weighted "
                                                 "RSS) and chi_square_fit_p."})
    flags = fields.List(fields.Dict(), metadata={
        "description": "Trust flags as {code, severity}. A batch summary does not compute "
                       "profile limits, so poorly_determined_parameter rests on the relative "
                       "standard error alone (detail=full gives the single fit's flags)."})
