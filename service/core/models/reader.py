"""Field-by-field reading and checking of a fitted-model document.

:class:`DocumentReader` checks the version, the field set, each field's type
and shape, the document's internal arithmetic and the checksum, raising
:class:`~service.core.errors.DocumentError` naming the first bad field.
"""

from __future__ import annotations

import math
from collections.abc import Mapping

import numpy as np

from service.core.data import transforms
from service.core.data.inputs import magnitude_limit
from service.core.errors import DataError, DocumentError
from service.core.models.canonical import CHECKSUM_PREFIX, checksum, to_float
from service.core.models.consistency import EPS, covariance_symmetric, curve_gap
from service.core.polynomial import design
from service.core.spec import HARD_MAX_DEGREE, TRANSFORMS

SUPPORTED_VERSIONS = (1,)
# x_shift and x_scale are recomputed from the transformed ends; a transform evaluated on
# another array may differ by an ulp or two (SIMD paths), so allow a few ulps of the ends
SCALING_ULPS = 8
EXTENDED_IS_WIDER = bool(np.finfo(np.longdouble).max > np.finfo(float).max)

# field name -> kind; the order is the order written (readers must not rely on it)
FIELDS: dict[str, str] = {
    "schema_version": "int",
    "family": "str",
    "degree": "int",
    "intercept": "bool",
    "terms": "str_list",
    "transform_x": "str",
    "transform_y": "str",
    "x_shift": "float",
    "x_scale": "float",
    "basis_coefficients": "vector",
    "r_factor": "matrix",
    "raw_coefficients": "vector_nullable",
    "raw_covariance": "matrix_nullable",
    "sigma": "float_nullable",
    "df_residual": "int",
    "n": "int",
    "x_min": "float",
    "x_max": "float",
    "weighted": "bool",
    "level": "float",
    "checksum": "str",
}
# written only when it says something: known-SD fits (absent means "relative")
OPTIONAL_FIELDS: dict[str, str] = {"weighting": "str"}


class DocumentReader:
    """Field-by-field validation with errors that name the field."""

    fields: Mapping[str, str] = FIELDS  # the layout read: field name -> typed reader
    optional_fields: Mapping[str, str] = OPTIONAL_FIELDS  # read when present

    def __init__(self, doc, prefix: str) -> None:
        self.doc = doc
        self.prefix = prefix

    def fail(self, name: str | None, message: str, fix: str):
        field = (self.prefix + name) if name else (self.prefix.rstrip(".") or None)
        raise DocumentError(message, field=field, fix=fix)

    def read(self) -> dict:
        doc = self.doc
        if not isinstance(doc, Mapping):
            self.fail(None, "The fitted-model document must be a JSON object.",
                      "Send the fitted_model object exactly as /v1/fit returned it.")
        if "schema_version" not in doc:
            self.fail("schema_version", "The document has no schema_version.",
                      "Send the fitted_model object exactly as /v1/fit returned it.")
        version = doc["schema_version"]
        if isinstance(version, bool) or version not in SUPPORTED_VERSIONS:
            self.fail("schema_version",
                      f"Unsupported schema_version {version!r}; this service reads "
                      f"{', '.join(map(str, SUPPORTED_VERSIONS))}.",
                      "Refit with this service to get a current document.")
        values = self.read_fields(version)
        self._check_scalars(values)
        return values

    def read_fields(self, version: int) -> dict:
        """Every field of :attr:`fields`, read by its typed reader; unknown or missing
        fields are refused naming them."""
        doc = self.doc
        known = {**self.fields, **self.optional_fields}
        unknown = sorted(str(key) for key in doc if key not in known)
        if unknown:
            self.fail(unknown[0], f"Unknown field {unknown[0]!r} in a schema_version "
                      f"{version} document.", "Remove fields that /v1/fit did not write.")
        for name in self.fields:
            if name not in doc:
                self.fail(name, f"The document is missing the required field {name!r}.",
                          "Send the fitted_model object unchanged, with every field.")
        return {name: getattr(self, "_" + kind)(name, doc[name])
                for name, kind in known.items() if name in doc}

    # --- typed readers
    def _int(self, name, value):
        if isinstance(value, bool) or not isinstance(value, (int, float)) or not (
                isinstance(value, int) or (math.isfinite(value) and value.is_integer())):
            self.fail(name, f"{name} must be an integer, got {value!r}.",
                      f"Send the {name} that /v1/fit wrote.")
        return int(value)

    def _bool(self, name, value):
        if not isinstance(value, bool):
            self.fail(name, f"{name} must be true or false, got {value!r}.",
                      f"Send the {name} that /v1/fit wrote.")
        return value

    def _str(self, name, value):
        if not isinstance(value, str):
            self.fail(name, f"{name} must be a string.", f"Send the {name} that /v1/fit wrote.")
        return value

    def _str_list(self, name, value):
        if not isinstance(value, list) or not all(isinstance(v, str) for v in value):
            self.fail(name, f"{name} must be a list of strings.",
                      f"Send the {name} that /v1/fit wrote.")
        return list(value)

    def _number(self, name, value, nullable: bool):
        if value is None and nullable:
            return None
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            self.fail(name, f"{name} must be a number, got {value!r}.",
                      f"Send the {name} that /v1/fit wrote.")
        value = float(value)
        if not math.isfinite(value):
            self.fail(name, f"{name} must be finite.", f"Send the {name} that /v1/fit wrote.")
        return value

    def _float(self, name, value):
        return self._number(name, value, nullable=False)

    def _float_nullable(self, name, value):
        return self._number(name, value, nullable=True)

    def _vector(self, name, value, nullable: bool = False):
        if not isinstance(value, list):
            self.fail(name, f"{name} must be a list of numbers.",
                      f"Send the {name} that /v1/fit wrote.")
        return [self._number(f"{name}[{i}]", v, nullable) for i, v in enumerate(value)]

    def _vector_nullable(self, name, value):
        return self._vector(name, value, nullable=True)

    def _matrix(self, name, value, nullable: bool = False):
        if not isinstance(value, list):
            self.fail(name, f"{name} must be a list of rows.",
                      f"Send the {name} that /v1/fit wrote.")
        return [self._vector(f"{name}[{i}]", row, nullable) for i, row in enumerate(value)]

    def _matrix_nullable(self, name, value):
        return self._matrix(name, value, nullable=True)

    # --- whole-document checks
    def _check_scalars(self, v: dict) -> None:
        keep = "Send the fitted_model object exactly as /v1/fit returned it."
        if v["family"] != "polynomial":
            self.fail("family", f"Unknown family {v['family']!r}; only 'polynomial'.", keep)
        if not 0 <= v["degree"] <= HARD_MAX_DEGREE:
            self.fail("degree", f"degree must be 0..{HARD_MAX_DEGREE}.", keep)
        p = v["degree"] + (1 if v["intercept"] else 0)
        if p < 1:
            self.fail("degree", "A model without intercept needs degree >= 1.", keep)
        if len(v["terms"]) != p:
            self.fail("terms", f"terms must list {p} terms for this degree and intercept.", keep)
        for name in ("transform_x", "transform_y"):
            if v[name] not in TRANSFORMS:
                self.fail(name, f"{name} must be one of {', '.join(TRANSFORMS)}.", keep)
        if not v["x_scale"] > 0:
            self.fail("x_scale", "x_scale must be positive.", keep)
        for name in ("basis_coefficients", "raw_coefficients"):
            if len(v[name]) != p:
                self.fail(name, f"{name} must have {p} entries.", keep)
        for name in ("r_factor", "raw_covariance"):
            if len(v[name]) != p or any(len(row) != p for row in v[name]):
                self.fail(name, f"{name} must be a {p} x {p} matrix.", keep)
        if v["df_residual"] < 0 or v["n"] < p or v["df_residual"] > v["n"] - p:
            self.fail("df_residual", "df_residual must lie in 0 .. n - parameters.", keep)
        if v["sigma"] is None:
            v["sigma"] = math.nan
            if v["df_residual"] > 0:
                self.fail("sigma", "sigma is null although df_residual > 0.", keep)
        elif v["sigma"] < 0:
            self.fail("sigma", "sigma must be >= 0.", keep)
        if not v["x_min"] <= v["x_max"]:
            self.fail("x_min", "x_min must not exceed x_max.", keep)
        if not 0 < v["level"] < 1:
            self.fail("level", "level must lie strictly between 0 and 1.", keep)
        if "weighting" in v:
            if v["weighting"] != "known_sd":
                self.fail("weighting", "weighting is written only as \"known_sd\" (a "
                          "relative fit leaves it out).", keep)
            if not v["weighted"]:
                self.fail("weighted", "Known standard deviations imply weighted = true.", keep)
            if v["sigma"] != 1.0:
                self.fail("sigma", "With known standard deviations sigma is 1.", keep)

    def check_consistency(self, v, basis, raw, r_factor, covariance, p) -> None:
        """Catch hand edits that break the document's internal arithmetic, naming the field."""
        keep = "Send the fitted_model object exactly as /v1/fit returned it."
        if np.any(np.tril(r_factor, -1) != 0.0):
            self.fail("r_factor", "r_factor must be upper triangular.", keep)
        if np.any(np.diag(r_factor) == 0.0):
            self.fail("r_factor", "r_factor has a zero on its diagonal.", keep)
        if not v["intercept"] and v["x_shift"] != 0.0:
            self.fail("x_shift", "A model without intercept must have x_shift 0.", keep)
        with np.errstate(all="ignore"):
            self._check_scaling(v, keep)
            if not covariance_symmetric(v, covariance, r_factor):
                self.fail("raw_covariance", "raw_covariance must be symmetric.", keep)
            try:
                invertible = np.all(np.isfinite(np.linalg.inv(r_factor)))
            except np.linalg.LinAlgError:
                invertible = False
            if not invertible:
                self.fail("r_factor", "r_factor is singular in double precision.", keep)
            evaluable, gap, size, rounding = curve_gap(v, basis, raw, p)
        if not evaluable:
            self.fail("basis_coefficients", "The coefficients are too large to evaluate in "
                      "double precision over the calibrated range.", keep)
        if not np.all(np.isfinite(size)):
            if EXTENDED_IS_WIDER:  # the writer's own numbers always fit extended precision
                self.fail("raw_coefficients", "raw_coefficients and basis_coefficients cannot "
                          "be compared over the calibrated range.", keep)
        elif np.any(gap > 1e-7 * size + rounding + 1e-300):
            self.fail("raw_coefficients",
                      "raw_coefficients and basis_coefficients describe different curves; "
                      "one of them was edited.", keep)

    def _check_scaling(self, v, keep: str) -> None:
        """/v1/fit maps the calibrated range onto [-1, 1] (``design.scaling``); anything else
        was edited.

        The ends are transformed again and the writer's ``(x_shift, x_scale)`` recomputed
        from them. The two agree to rounding: the transform of an end may differ by an ulp or
        two between the data array and this two-element array, so the tolerance is a few
        ulps of the transformed ends (never a fraction of the scale: on a narrow range far
        from zero, one ulp of the shift is a sizeable part of the scale). The ends must also
        lie within the magnitude a fit of ``n`` points accepts.
        """
        ends = np.array([v["x_min"], v["x_max"]])
        try:
            u = transforms.apply(v["transform_x"], ends, field="x_min")
        except DataError:
            self.fail("x_min", f"x_min/x_max lie outside the domain of the {v['transform_x']} "
                      "transform.", keep)
        lo, hi = float(np.min(u)), float(np.max(u))
        top = max(abs(lo), abs(hi))
        if not (math.isfinite(top) and top <= magnitude_limit(v["n"])):
            self.fail("x_min", "x_min/x_max are larger in magnitude than a fit of n points "
                      "accepts.", keep)
        shift, scale = design.scaling(u, v["intercept"], (lo, hi))
        tolerance = SCALING_ULPS * EPS * top
        if abs(v["x_shift"] - shift) > tolerance:
            self.fail("x_shift", "x_shift is not the centre of [x_min, x_max] (on the "
                      "transformed scale) as /v1/fit writes it.", keep)
        if abs(v["x_scale"] - scale) > tolerance:
            self.fail("x_scale", "x_shift and x_scale do not map [x_min, x_max] onto "
                      "[-1, 1] as /v1/fit writes them.", keep)

    def checksum_body(self, v: dict) -> dict:
        """The values as the writer summed them (sigma through the writer's number helper)."""
        body = dict(v)
        body["sigma"] = to_float(body["sigma"])
        return body

    def check_checksum(self, v) -> None:
        given = v["checksum"]
        if not (given.startswith(CHECKSUM_PREFIX) and len(given) == len(CHECKSUM_PREFIX) + 64):
            self.fail("checksum", "checksum must be 'sha256:' followed by 64 hex digits.",
                      "Send the fitted_model object exactly as /v1/fit returned it.")
        if given != checksum(self.checksum_body(v)):
            self.fail("checksum",
                      "The checksum does not match the document's content: a field was changed "
                      "after the fit (hand edit, truncation or lossy number formatting).",
                      "Send the fitted_model object unchanged, or refit to get a new one.")

