"""POST /v1/batch: the compact per-series summary of a polynomial fit, and the response.

:func:`summary_rows` writes the compact summary of every fitted series from the
engine's columnar result (the names here are the wire contract; NaN becomes JSON
null in the JSON layer).
"""

from __future__ import annotations

import numpy as np
from marshmallow import Schema, fields

_CRITERION = {"sequential_f": "p_last", "aic": "aic", "aicc": "aicc", "bic": "bic",
              "press": "press", "adj_r2": "adj_r_squared", "fixed": None}


def summary_rows(result, rows, terms_of, *, known_sd: bool = False) -> list[dict]:
    """Compact summaries of the fitted rows ``rows`` of a columnar batch result.

    ``result`` has ``columns``, ``coefficients``, ``std_errors``, ``candidates``,
    ``select``, ``outliers`` and ``flags_of(mask, levels)`` (the core's BatchResult);
    ``terms_of(degree, intercept)`` names the coefficients. ``known_sd`` (weighting
    ``known_sd``) adds the chi-square goodness-of-fit test to ``tests``.
    """
    rows = np.asarray(rows, dtype=np.int64)
    if rows.size == 0:
        return []
    c = result.columns
    degree = c["degree"][rows]
    top = c["min_degree"][rows]
    select = result.select[rows]
    measure_rows = {}
    for method in set(select.tolist()):
        measure = _CRITERION.get(method)
        if measure is None:
            continue
        where = np.flatnonzero(select == method)
        vals = result.candidates[measure][rows[where]]
        have = ~np.isnan(vals)
        last = vals.shape[1] - 1 - np.argmax(have[:, ::-1], axis=1)
        last = np.where(have.any(axis=1), last, -1)
        count = np.maximum(last + 1, degree[where] - top[where] + 1)
        f = result.candidates["f_last"][rows[where]].tolist() if method == "sequential_f" \
            else None
        for j, (i, v, m) in enumerate(zip(where.tolist(), vals.tolist(), count.tolist(),
                                          strict=True)):
            t0 = int(top[i])
            sel = {"method": method, "degrees": list(range(t0, t0 + m)), "criterion": measure,
                   "values": v[:m]}
            if f is not None:
                sel["f"] = f[j][:m]
            measure_rows[i] = sel
    k = degree + result.intercept[rows]
    terms_cache: dict = {}
    out = []
    columns = zip(rows.tolist(), c["n"][rows].tolist(), degree.tolist(), k.tolist(),
                  result.intercept[rows].tolist(), select.tolist(),
                  result.coefficients[rows].tolist(), result.std_errors[rows].tolist(),
                  c["sigma"][rows].tolist(), c["r_squared"][rows].tolist(),
                  c["adj_r_squared"][rows].tolist(), c["df_residual"][rows].tolist(),
                  c["shapiro_wilk_p"][rows].tolist(), c["breusch_pagan_p"][rows].tolist(),
                  c["durbin_watson"][rows].tolist(), c["durbin_watson_p"][rows].tolist(),
                  c["lack_of_fit_p"][rows].tolist(), c["flags"][rows].tolist(),
                  c["flag_levels"][rows].tolist(), strict=True)
    flags_of, outliers = result.flags_of, result.outliers
    chi, chi_p = (c[name][rows].tolist() for name in ("chi_square_fit", "chi_square_fit_p"))
    for i, (row, n, deg, kk, icpt, method, est, se, sigma, r2, adj, df, sw, bp, dw, dw_p, lof,
            mask, levels) in enumerate(columns):
        terms = terms_cache.get((deg, icpt))
        if terms is None:
            terms = terms_cache[(deg, icpt)] = list(terms_of(deg, icpt))
        body = {"n": n, "degree": deg, "terms": terms, "estimate": est[:kk],
                "std_error": se[:kk], "sigma": sigma, "r_squared": r2, "adj_r_squared": adj,
                "df_residual": df, "selection": measure_rows.get(i) or {"method": method},
                "tests": {"shapiro_wilk_p": sw, "breusch_pagan_p": bp, "durbin_watson": dw,
                          "durbin_watson_p": dw_p, "lack_of_fit_p": lof},
                "flags": [{"code": code, "severity": severity}
                          for code, severity in flags_of(mask, levels)]}
        if known_sd:
            body["tests"].update(chi_square_fit=chi[i], chi_square_fit_p=chi_p[i])
        if row in outliers:
            body["outliers"] = list(outliers[row])
        out.append(body)
    return out


class SummarySchema(Schema):
    """Compact result of one series (detail=summary). Undefined numbers are null."""

    n = fields.Integer(metadata={"description": "Points used."})
    degree = fields.Integer(metadata={"description": "Chosen (or fixed) degree."})
    terms = fields.List(fields.String(), metadata={"description": "intercept, x, x^2, ..."})
    estimate = fields.List(fields.Float(allow_none=True), metadata={
        "description": "Coefficients on raw x (after transform_x), in the order of terms."})
    std_error = fields.List(fields.Float(allow_none=True), metadata={
        "description": "Their standard errors (with weighting known_sd from the unscaled "
                       "covariance: sigma is not rescaled)."})
    sigma = fields.Float(allow_none=True, metadata={"description": "Residual standard deviation."})
    r_squared = fields.Float(allow_none=True)
    adj_r_squared = fields.Float(allow_none=True)
    df_residual = fields.Integer()
    selection = fields.Dict(metadata={
        "description": "method; when the degree was selected also degrees (the candidates), "
                       "criterion (p_last for sequential_f: p-value of each candidate's last "
                       "power; else aic, aicc, bic, press or adj_r_squared), values (null where "
                       "undefined, and for sequential_f beyond the first non-significant "
                       "power, which the climb never examines), and f (sequential F)."})
    tests = fields.Dict(metadata={"description": "shapiro_wilk_p, breusch_pagan_p, "
                                                 "durbin_watson, durbin_watson_p (one-sided, "
                                                 "positive serial correlation), lack_of_fit_p "
                                                 "(null if not computed); with weighting "
                                                 "known_sd also chi_square_fit (the weighted "
                                                 "RSS) and chi_square_fit_p (against "
                                                 "chi-square on df_residual)."})
    flags = fields.List(fields.Dict(), metadata={
        "description": "Trust flags as {code, severity} (as in /v1/fit flags, without the "
                       "message and evidence; see /docs). Triage on severity: caution and "
                       "serious flags rest on tests with a family-wise level of 0.05 per fit, "
                       "or on facts about the design; info flags describe the design."})
    outliers = fields.List(fields.Integer(), metadata={
        "description": "Indices of outlying points, when there are any."})


class BatchResultSchema(Schema):
    """One line of the result: the series id, its status, and its fit or its error."""

    id = fields.Raw(metadata={"type": ["string", "integer"]})
    status = fields.String(metadata={"enum": ["ok", "error"]})
    fit = fields.Dict(metadata={"description": "SummarySchema, or CurveSummarySchema for a "
                                               "nonlinear family (detail=summary), or the whole "
                                               "/v1/fit response (detail=full)."})
    error = fields.Dict(metadata={"description": "Problem details for this series alone "
                                                 "(status 422, or 413 over the point limit)."})


class BatchResponseSchema(Schema):
    """Results in request order, then counts."""

    results = fields.List(fields.Nested(BatchResultSchema))
    summary = fields.Dict(metadata={
        "description": "Counts: ok and error series; serious, caution and info, the fitted "
                       "series by their most severe flag; flagged, those with at least one "
                       "caution or serious flag (serious + caution)."})
