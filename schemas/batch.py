"""POST /v1/batch: the request envelope, one series, and the compact per-series summary.

The envelope (shared model and options) is a marshmallow schema. The series
are checked one by one with :func:`load_series` — the same bulk numeric-array
field as /v1/fit, but a bad series becomes an error *result* for that series
alone, never a failure of the whole batch. :func:`summary_rows` writes the
compact summary of every fitted series from the engine's columnar result (the
names here are the wire contract; NaN becomes JSON null in the JSON layer).
"""

from __future__ import annotations

import numpy as np
from marshmallow import Schema, ValidationError, fields, validate

from schemas.common import MISSING_POLICIES, SECTIONS, UNKNOWN_FIELD, StrictSchema
from schemas.fields import NumberArray, StrictFloat, StrictString, one_of_message
from schemas.fit import GridSchema, ModelSchema

DETAILS = ("summary", "full")
SERIES_FIELDS = ("id", "x", "y", "weights", "model")
_X = NumberArray(allow_null_items=True)
_Y = NumberArray(allow_null_items=True)
_W = NumberArray(allow_null_items=True, allow_none=True)
_MODEL = ModelSchema()
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
    model = fields.Nested(ModelSchema, metadata={
        "description": "This series' own model; overrides the shared model."})


class BatchRequestSchema(StrictSchema):
    """Many independent series and the options they share."""

    series = fields.List(fields.Raw(), required=True, metadata={
        "description": "The series (see Series). Each is checked on its own: a bad series "
                       "gets an error result, the others are fitted.",
        "items": {"$ref": "#/components/schemas/Series"}})
    model = fields.Nested(ModelSchema, load_default=lambda: _MODEL.load({}), metadata={
        "description": "The shared model (as in /v1/fit). Default: degree chosen from 1..3 "
                       "by sequential F."})
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
        "description": "summary (default): compact result per series from the vectorized "
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
        raise ValidationError({k: [UNKNOWN_FIELD] for k in unknown})
    ident = obj.get("id", position)
    if isinstance(ident, bool) or not isinstance(ident, (str, int)):
        raise ValidationError({"id": ["Must be a string or an integer."]})
    errors: dict = {}
    arrays = {}
    for name, field in (("x", _X), ("y", _Y), ("weights", _W)):
        if name not in obj:
            if name != "weights":
                errors[name] = ["Missing required field. Add it; see /docs for its meaning."]
            continue
        try:
            arrays[name] = field.deserialize(obj[name], name, obj)
        except ValidationError as exc:
            errors.update(_prefixed(name, exc.messages))
    model = None
    if obj.get("model") is not None:
        try:
            model = _MODEL.load(obj["model"])
        except ValidationError as exc:
            errors.update(_prefixed("model", exc.messages))
    if errors:
        raise ValidationError(errors)
    return ident, arrays["x"], arrays["y"], arrays.get("weights"), model


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
    ``select``, ``outliers`` and ``flag_codes(row)`` (the core's BatchResult);
    ``terms_of(degree, intercept)`` names the coefficients.
    """
    rows = np.asarray(rows, dtype=np.int64)
    if rows.size == 0:
        return []
    c = result.columns
    col = {name: c[name][rows].tolist() for name in (
        "n", "degree", "min_degree", "df_residual", "sigma", "r_squared", "adj_r_squared",
        "shapiro_wilk_p", "breusch_pagan_p", "durbin_watson", "lack_of_fit_p")}
    coef = result.coefficients[rows].tolist()
    se = result.std_errors[rows].tolist()
    intercept = result.intercept[rows].tolist()
    select = result.select[rows].tolist()
    cand = {m: result.candidates[m][rows].tolist() for m in ("p_last", "f_last", "aic", "aicc",
                                                             "bic", "press", "adj_r_squared")}
    out = []
    for i, row in enumerate(rows.tolist()):
        degree, icpt, method = col["degree"][i], intercept[i], select[i]
        k = degree + (1 if icpt else 0)
        top = col["min_degree"][i]
        ncand = len(cand["aic"][i])
        measure = _CRITERION.get(method)
        selection = {"method": method}
        if measure is not None:
            values = cand[measure][i]
            last = next((j for j in range(ncand - 1, -1, -1) if values[j] == values[j]), -1)
            degrees = list(range(top, top + max(last + 1, degree - top + 1)))
            selection["degrees"] = degrees
            selection["criterion"] = measure
            selection["values"] = values[:len(degrees)]
            if method == "sequential_f":
                selection["f"] = cand["f_last"][i][:len(degrees)]
        body = {"n": col["n"][i], "degree": degree, "terms": list(terms_of(degree, icpt)),
                "estimate": coef[i][:k], "std_error": se[i][:k], "sigma": col["sigma"][i],
                "r_squared": col["r_squared"][i], "adj_r_squared": col["adj_r_squared"][i],
                "df_residual": col["df_residual"][i], "selection": selection,
                "tests": {"shapiro_wilk_p": col["shapiro_wilk_p"][i],
                          "breusch_pagan_p": col["breusch_pagan_p"][i],
                          "durbin_watson": col["durbin_watson"][i],
                          "lack_of_fit_p": col["lack_of_fit_p"][i]},
                "flags": list(result.flag_codes(row))}
        if row in result.outliers:
            body["outliers"] = list(result.outliers[row])
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
        "description": "method; for selection also degrees (candidates examined), criterion "
                       "(p_last for sequential_f: p-value of each candidate's last power), "
                       "values, and f (sequential F) for sequential_f."})
    tests = fields.Dict(metadata={"description": "shapiro_wilk_p, breusch_pagan_p, "
                                                 "durbin_watson, lack_of_fit_p (null if not "
                                                 "computed)."})
    flags = fields.List(fields.String(), metadata={
        "description": "Trust flag codes (as in /v1/fit flags; see /docs for the messages)."})
    outliers = fields.List(fields.Integer(), metadata={
        "description": "Indices of outlying points, when there are any."})


class BatchResultSchema(Schema):
    """One line of the result: the series id, its status, and its fit or its error."""

    id = fields.Raw(metadata={"type": ["string", "integer"]})
    status = fields.String(metadata={"enum": ["ok", "error"]})
    fit = fields.Dict(metadata={"description": "SummarySchema (detail=summary) or the whole "
                                               "/v1/fit response (detail=full)."})
    error = fields.Dict(metadata={"description": "Problem details for this series alone "
                                                 "(status 422, or 413 over the point limit)."})


class BatchResponseSchema(Schema):
    """Results in request order, then counts."""

    results = fields.List(fields.Nested(BatchResultSchema))
    summary = fields.Dict(metadata={"description": "ok, error and flagged counts."})
