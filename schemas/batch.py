"""POST /v1/batch: the request envelope, one series, and the compact per-series summary.

The envelope (shared model and options) is a marshmallow schema. The series
are checked one by one with :func:`load_series` — the same bulk numeric-array
field as /v1/fit, but a bad series becomes an error *result* for that series
alone, never a failure of the whole batch. :func:`summary_rows` writes the
compact summary of every fitted series from the engine's columnar result (the
names here are the wire contract; NaN becomes JSON null in the JSON layer).
"""

from __future__ import annotations

from itertools import chain

import numpy as np
from marshmallow import Schema, ValidationError, fields, validate

from schemas.common import MISSING_POLICIES, SECTIONS, UNKNOWN_FIELD, StrictSchema
from schemas.fields import NumberArray, PassThroughArray, StrictFloat, StrictString, one_of_message
from schemas.fit import GridSchema, ModelSchema
from schemas.model_field import ModelField, misplaced_model_options

DETAILS = ("summary", "full")
SERIES_FIELDS = ("id", "x", "y", "weights", "model")
_X = NumberArray(allow_null_items=True, data=True)
_Y = NumberArray(allow_null_items=True, data=True)
_W = NumberArray(allow_null_items=True, allow_none=True, data=True)
_MODEL = ModelSchema()
_MODEL_FIELD = ModelField(comparisons=False)
_CRITERION = {"sequential_f": "p_last", "aic": "aic", "aicc": "aicc", "bic": "bic",
              "press": "press", "adj_r2": "adj_r_squared", "fixed": None}


class SeriesSchema(StrictSchema):
    """One series of a batch (documentation; loaded by :func:`load_series`)."""

    id = fields.Raw(metadata={"description": "Your identifier (string or integer), echoed in "
                                            "the result. Default: the series' position.",
                              "type": ["string", "integer"]})
    x = NumberArray(required=True, allow_null_items=True,
                    metadata={"description": "Predictor values."})
    y = NumberArray(required=True, allow_null_items=True,
                    metadata={"description": "Response values, same length as x."})
    weights = NumberArray(allow_none=True, allow_null_items=True, metadata={
        "description": "Optional inverse variances (1/sd^2), same length as x."})
    model = ModelField(comparisons=False, metadata={
        "description": "This series' own model (any family /v1/fit accepts); overrides the "
                       "shared model."})


class BatchRequestSchema(StrictSchema):
    """Many independent series and the options they share."""

    series = PassThroughArray(required=True, metadata={
        "description": "The series (see Series). Each is checked on its own: a bad series "
                       "gets an error result, the others are fitted.",
        "items": {"$ref": "#/components/schemas/Series"}})
    model = ModelField(comparisons=False, load_default=lambda: _MODEL.load({}), metadata={
        "description": "The shared model (as in /v1/fit: a polynomial, a built-in nonlinear "
                       "family with automatic start values for every series, or an expression "
                       "with its start values). Default: degree chosen from 1..3 by "
                       "sequential F."})
    level = StrictFloat(load_default=0.95, validate=validate.Range(
        0, 1, min_inclusive=False, max_inclusive=False,
        error="Must be strictly between 0 and 1, e.g. 0.95."),
        metadata={"description": "Confidence level (coefficient limits and bands in full "
                                 "detail)."})
    missing = StrictString(load_default="error", validate=validate.OneOf(
        MISSING_POLICIES, error=one_of_message(MISSING_POLICIES)), metadata={
        "description": "What null means in x, y or weights: error (default) or drop."})
    detail = StrictString(load_default="summary", validate=validate.OneOf(
        DETAILS, error=one_of_message(DETAILS)), metadata={
        "description": "summary (default): compact result per series from the batch "
                       "engine. full: the whole /v1/fit report per series (slower)."})
    include = fields.List(StrictString(validate=validate.OneOf(
        SECTIONS, error=one_of_message(SECTIONS))), load_default=None, metadata={
        "description": "Sections of each full report (detail=full only; default all but "
                       "grid)."})
    grid = fields.Nested(GridSchema, allow_none=True, load_default=None, metadata={
        "description": "Grid of each full report (detail=full only; default none)."})


class OptionsLineSchema(BatchRequestSchema):
    """NDJSON only: an optional first line ``{"options": {...}}`` with the shared options."""

    series = fields.List(fields.Raw(), load_default=list, metadata={
        "description": "Not used in NDJSON: one series per line instead."})


class BatchOptionsSchema(BatchRequestSchema):
    """Arrow and Parquet bodies: the shared options (the JSON body without series), sent as
    the ``options`` query parameter, a JSON object."""

    class Meta(BatchRequestSchema.Meta):
        exclude = ("series",)


def valid_id(ident) -> bool:
    """A series id is a string or an integer (a JSON boolean is not)."""
    return not isinstance(ident, bool) and isinstance(ident, (str, int))


def load_series(obj, position: int):
    """Check one series object; return ``(id, x, y, weights, model_dict_or_None)``.

    Raises
    ------
    ValidationError
        With messages keyed by field path inside the series (``y[17]``, ``model.degree``).
    """
    if not isinstance(obj, dict):
        raise ValidationError({"_body": ["Each series must be a JSON object with x and y."]})
    unknown = [k for k in obj if k not in SERIES_FIELDS]
    if unknown:
        misplaced = misplaced_model_options(obj, SERIES_FIELDS)
        raise ValidationError({k: misplaced.get(k, [UNKNOWN_FIELD]) for k in unknown})
    ident = obj.get("id", position)
    if not valid_id(ident):
        raise ValidationError({"id": ["Must be a string or an integer."]})
    errors: dict = {}
    arrays = {}
    for name, field in (("x", _X), ("y", _Y), ("weights", _W)):
        if name not in obj:
            if name != "weights":
                errors[name] = ["Missing required field. Add it; see /docs for its meaning."]
            continue
        value = obj[name]
        try:
            if value is None:
                if name != "weights":
                    raise ValidationError(["May not be null. Send an array of numbers."])
                continue
            arrays[name] = field._deserialize(value, name, obj)  # the bulk check, no wrapper
        except ValidationError as exc:
            errors.update(_prefixed(name, exc.messages))
    model = None
    if obj.get("model") is not None:
        try:
            model = _MODEL_FIELD.deserialize(obj["model"])
        except ValidationError as exc:
            errors.update(_prefixed("model", exc.messages))
    if errors:
        raise ValidationError(errors)
    return ident, arrays["x"], arrays["y"], arrays.get("weights"), model


_PLAIN_FIELDS = frozenset(("id", "x", "y"))


def load_plain_series(series: list, max_points: int):
    """The common case in bulk: every series is ``{id?, x, y}`` with plain numbers.

    Returns ``(ids, x, y, lengths)`` with ``x`` and ``y`` flat float64 arrays, or
    None as soon as any series needs the per-series checks of :func:`load_series`
    (weights, a model, nulls, a wrong type or length, too many points): that path
    then gives each bad series its own error. The checks here are the same rules,
    applied to all series at once (the type of every element, in one pass).
    """
    ids, xs, ys = [], [], []
    for position, obj in enumerate(series):
        if type(obj) is not dict or not obj.keys() <= _PLAIN_FIELDS:
            return None
        x, y, ident = obj.get("x"), obj.get("y"), obj.get("id", position)
        if (type(x) is not list or type(y) is not list or len(x) != len(y)
                or not max(_X.min_items, 1) <= len(x) <= max_points
                or not valid_id(ident)):
            return None
        ids.append(ident)
        xs.append(x)
        ys.append(y)
    total = sum(map(len, xs))
    if not (set(map(type, chain.from_iterable(xs))) | set(map(type, chain.from_iterable(ys)))
            ) <= {float, int}:
        return None
    try:
        x = np.fromiter(chain.from_iterable(xs), dtype=np.float64, count=total)
        y = np.fromiter(chain.from_iterable(ys), dtype=np.float64, count=total)
    except OverflowError:        # an integer beyond the float range
        return None
    if not (np.isfinite(x).all() and np.isfinite(y).all()):
        return None
    return ids, x, y, np.fromiter(map(len, xs), dtype=np.int64, count=len(xs))


def _prefixed(name: str, messages) -> dict:
    if isinstance(messages, list):
        return {name: messages}
    out = {}
    for key, value in messages.items():
        path = f"{name}[{key}]" if isinstance(key, int) else f"{name}.{key}"
        if isinstance(value, dict):
            out.update(_prefixed(path, value))
        else:
            out[path] = list(value)
    return out


def summary_rows(result, rows, terms_of) -> list[dict]:
    """Compact summaries of the fitted rows ``rows`` of a columnar batch result.

    ``result`` has ``columns``, ``coefficients``, ``std_errors``, ``candidates``,
    ``select``, ``outliers`` and ``flags_of(mask, levels)`` (the core's BatchResult);
    ``terms_of(degree, intercept)`` names the coefficients.
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
        "description": "Their standard errors."})
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
                                                 "(null if not computed)."})
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
