"""The fitted-model document, schema_version 2: a nonlinear family's fitted curve.

:func:`to_curve_document` writes a :class:`~service.core.nonlinear.report.FittedCurve`
(the ``expression`` family and every built-in family) as a checksummed, JSON-ready
dict; :func:`from_curve_document` reads it back, checks every field and the
checksum, and raises :class:`~service.core.errors.DocumentError` naming the first
bad field. The canonical form and checksum are version 1's
(:mod:`service.core.models.canonical`); polynomials keep writing version 1.

The equation is stored as its canonical text in the expression grammar and
re-compiled on reading with :func:`~service.core.nonlinear.expression.compile_model`
(parsed with an allow-list, never evaluated). The layout is specified in
``docs/fitted-model.md``.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import Any

import numpy as np

from service.core.errors import SpecError
from service.core.models.canonical import checksum, to_float, to_matrix, to_vector
from service.core.models.reader import DocumentReader
from service.core.nonlinear.builtin.catalogue import BUILTINS
from service.core.nonlinear.expression import compile_model
from service.core.nonlinear.report import FittedCurve
from service.core.results import frozen_array
from service.core.spec import WEIGHTINGS

SCHEMA_VERSION = 2
CURVE_FAMILIES = ("expression", *BUILTINS)
"""The families whose fits carry a :class:`FittedCurve` and write this layout."""
DISTRIBUTIONS = {"relative": "t", "known_sd": "normal"}
"""The reference distribution of the limits for each weighting mode (as the fit sets it)."""
SYMMETRY_RTOL = 1e-12  # relative to the largest |entry|; the writer's matrix is symmetric

# field name -> kind (the DocumentReader's typed readers); the order is the order written
CURVE_FIELDS: dict[str, str] = {
    "schema_version": "int",
    "family": "str",
    "expression": "str",
    "parameter_names": "str_list",
    "estimates": "vector",
    "covariance": "matrix_nullable",
    "sigma": "float_nullable",
    "noise_variance": "float_nullable",
    "df_residual": "int",
    "n": "int",
    "x_min": "float",
    "x_max": "float",
    "weighted": "bool",
    "weighting": "str",
    "distribution": "str",
    "level": "float",
    "checksum": "str",
}
_KEEP = "Send the fitted_model object exactly as /v1/fit returned it."


def to_curve_document(fitted: FittedCurve) -> dict:
    """Write a nonlinear family's fitted curve as a portable, checksummed document.

    Parameters
    ----------
    fitted : FittedCurve
        The model part of a nonlinear fit report.

    Returns
    -------
    dict
        JSON-ready; NaN is written as ``None``. ``schema_version`` is 2.
    """
    body = {
        "schema_version": SCHEMA_VERSION,
        "family": str(fitted.family),
        "expression": str(fitted.expression),
        "parameter_names": [str(name) for name in fitted.parameter_names],
        "estimates": to_vector(fitted.estimates),
        "covariance": to_matrix(fitted.covariance),
        "sigma": to_float(fitted.sigma),
        "noise_variance": to_float(fitted.noise_variance),
        "df_residual": int(fitted.df_residual),
        "n": int(fitted.n),
        "x_min": to_float(fitted.x_min),
        "x_max": to_float(fitted.x_max),
        "weighted": bool(fitted.weighted),
        "weighting": str(fitted.weighting),
        "distribution": str(fitted.distribution),
        "level": to_float(fitted.level),
    }
    body["checksum"] = checksum(body)
    return body


def from_curve_document(doc: Mapping[str, Any], *, field_prefix: str = "") -> FittedCurve:
    """Read and verify a schema_version 2 document.

    Parameters
    ----------
    doc : mapping
        A document as written by :func:`to_curve_document` (after any JSON round trip).
    field_prefix : str
        Prepended to field names in errors (the web layer passes ``"fitted_model."``).

    Returns
    -------
    FittedCurve
        With ``model`` re-compiled from the equation text.

    Raises
    ------
    DocumentError
        Not a mapping, wrong ``schema_version``, unknown or missing field, wrong type
        or shape, inconsistent content, an equation that does not compile with
        exactly the named parameters, or a checksum mismatch; ``field`` names it.
    """
    reader = CurveReader(doc, field_prefix)
    values = reader.read()
    p = len(values["parameter_names"])
    estimates = np.asarray(values["estimates"], dtype=float)
    covariance = np.array([[math.nan if v is None else v for v in row]
                           for row in values["covariance"]], dtype=float).reshape(p, p)
    reader.check_covariance(covariance)
    model = reader.compiled(values)
    reader.check_checksum(values)
    return FittedCurve(
        family=values["family"], expression=values["expression"],
        parameter_names=tuple(values["parameter_names"]), estimates=frozen_array(estimates),
        covariance=frozen_array(covariance), sigma=_nan(values["sigma"]),
        noise_variance=_nan(values["noise_variance"]), df_residual=values["df_residual"],
        n=values["n"], x_min=values["x_min"], x_max=values["x_max"],
        weighted=values["weighted"], weighting=values["weighting"],
        distribution=values["distribution"], level=values["level"], model=model)


def _nan(value: float | None) -> float:
    return math.nan if value is None else value


class CurveReader(DocumentReader):
    """Field-by-field validation of a schema_version 2 document, naming the field."""

    fields = CURVE_FIELDS
    optional_fields = {}

    def read(self) -> dict:
        doc = self.doc
        if not isinstance(doc, Mapping):
            self.fail(None, "The fitted-model document must be a JSON object.", _KEEP)
        version = doc.get("schema_version")
        if isinstance(version, bool) or version != SCHEMA_VERSION:
            self.fail("schema_version", f"A {doc.get('family')!r} document must have "
                      f"schema_version {SCHEMA_VERSION}, got {version!r}.",
                      "Refit with this service to get a current document.")
        values = self.read_fields(SCHEMA_VERSION)
        self._check_curve_scalars(values)
        return values

    def _check_curve_scalars(self, v: dict) -> None:
        if v["family"] not in CURVE_FAMILIES:
            self.fail("family", f"Unknown family {v['family']!r} for a schema_version 2 "
                      f"document; one of {', '.join(CURVE_FAMILIES)}.", _KEEP)
        p = len(v["parameter_names"])
        if p < 1 or len(set(v["parameter_names"])) != p:
            self.fail("parameter_names", "parameter_names must list distinct names.", _KEEP)
        if len(v["estimates"]) != p:
            self.fail("estimates", f"estimates must have {p} entries.", _KEEP)
        if len(v["covariance"]) != p or any(len(row) != p for row in v["covariance"]):
            self.fail("covariance", f"covariance must be a {p} x {p} matrix.", _KEEP)
        if v["n"] < p:
            self.fail("n", "n must be at least the number of parameters.", _KEEP)
        if v["df_residual"] != v["n"] - p:
            self.fail("df_residual", "df_residual must equal n minus the number of "
                      "parameters.", _KEEP)
        if v["sigma"] is None and v["df_residual"] > 0:
            self.fail("sigma", "sigma is null although df_residual > 0.", _KEEP)
        if v["sigma"] is not None and v["sigma"] < 0:
            self.fail("sigma", "sigma must be >= 0.", _KEEP)
        if not v["x_min"] <= v["x_max"]:
            self.fail("x_min", "x_min must not exceed x_max.", _KEEP)
        if v["weighting"] not in WEIGHTINGS:
            self.fail("weighting", f"weighting must be one of {', '.join(WEIGHTINGS)}.", _KEEP)
        if v["weighting"] == "known_sd" and not v["weighted"]:
            self.fail("weighted", "Known standard deviations imply weighted = true.", _KEEP)
        if v["distribution"] != DISTRIBUTIONS[v["weighting"]]:
            self.fail("distribution", f"distribution must be "
                      f"{DISTRIBUTIONS[v['weighting']]!r} with weighting "
                      f"{v['weighting']!r}.", _KEEP)
        self._check_noise(v)
        if not 0 < v["level"] < 1:
            self.fail("level", "level must lie strictly between 0 and 1.", _KEEP)

    def _check_noise(self, v: dict) -> None:
        """``noise_variance`` is 1 with known SDs, else ``sigma²`` exactly as the fit forms it."""
        sigma = math.nan if v["sigma"] is None else v["sigma"]
        expected = 1.0 if v["weighting"] == "known_sd" else to_float(sigma * sigma)
        if v["noise_variance"] != expected:
            self.fail("noise_variance", "noise_variance must be 1 with known standard "
                      "deviations and sigma squared otherwise.", _KEEP)

    def check_covariance(self, covariance: np.ndarray) -> None:
        """Symmetric (to rounding) where defined; NaN entries must mirror each other."""
        with np.errstate(all="ignore"):
            mirrored = np.isnan(covariance) == np.isnan(covariance.T)
            finite = np.nan_to_num(covariance, nan=0.0)
            scale = float(np.max(np.abs(finite))) if finite.size else 0.0
            gap = float(np.max(np.abs(finite - finite.T))) if finite.size else 0.0
        if not mirrored.all() or not gap <= SYMMETRY_RTOL * scale:
            self.fail("covariance", "covariance must be symmetric.", _KEEP)

    def compiled(self, v: dict):
        """The equation compiled again (parse only) with exactly the named parameters."""
        try:
            model = compile_model(v["expression"], tuple(v["parameter_names"]))
        except SpecError as error:
            self.fail("expression", f"The equation does not compile with parameters "
                      f"{', '.join(v['parameter_names'])}: {error}", _KEEP)
        if model.text != v["expression"]:
            self.fail("expression", "The equation is not in the canonical form /v1/fit "
                      "writes.", _KEEP)
        return model

    def checksum_body(self, v: dict) -> dict:
        """The values as the writer summed them (read back unchanged)."""
        return v
