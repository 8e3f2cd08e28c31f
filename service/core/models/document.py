"""The portable fitted-model document: a versioned, checksummed JSON-ready dict.

A client stores the document that ``/v1/fit`` returns and sends it back to
``/v1/predict`` and ``/v1/invert``. :func:`to_document` writes it from a
:class:`~service.core.results.FittedPolynomial`; :func:`from_document` reads it
back, checks every field and the checksum, and raises
:class:`~service.core.errors.DocumentError` naming the first bad field.

The checksum (:mod:`service.core.models.canonical`) is ``"sha256:" + hex``
over the *canonical form*: every field except ``checksum``, each value first
normalized to its declared type (so an integer-valued float that a JSON library
wrote as ``0`` still reads as ``0.0``), then serialized as JSON with sorted keys, no
whitespace, ASCII only, floats in Python ``repr`` (shortest digits that round-trip
exactly), undefined numbers as ``null``. Any faithful JSON transport therefore keeps the checksum
valid, and any edited value breaks it. The format is specified in
``docs/fitted-model.md``.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

import numpy as np

from service.core.models.canonical import (
    CHECKSUM_PREFIX,
    canonical_bytes,
    checksum,
    to_float,
    to_matrix,
    to_vector,
)
from service.core.models.reader import FIELDS, SUPPORTED_VERSIONS, DocumentReader
from service.core.results import FittedPolynomial, frozen_array

__all__ = ["CHECKSUM_PREFIX", "FIELDS", "SCHEMA_VERSION", "SUPPORTED_VERSIONS", "canonical_bytes",
           "checksum", "from_document", "to_document"]

SCHEMA_VERSION = 1


def to_document(fitted: FittedPolynomial) -> dict:
    """Write a fitted polynomial as a portable, checksummed document.

    Parameters
    ----------
    fitted : FittedPolynomial
        The model part of a fit report.

    Returns
    -------
    dict
        JSON-ready (plain ``int``/``float``/``str``/``bool``/``None``/lists);
        NaN is written as ``None``. Includes ``schema_version`` and ``checksum``.
    """
    body = {
        "schema_version": SCHEMA_VERSION,
        "family": "polynomial",
        "degree": int(fitted.degree),
        "intercept": bool(fitted.intercept),
        "terms": [str(term) for term in fitted.terms],
        "transform_x": str(fitted.transform_x),
        "transform_y": str(fitted.transform_y),
        "x_shift": to_float(fitted.x_shift),
        "x_scale": to_float(fitted.x_scale),
        "basis_coefficients": to_vector(fitted.basis_coefficients),
        "r_factor": to_matrix(fitted.r_factor),
        "raw_coefficients": to_vector(fitted.raw_coefficients),
        "raw_covariance": to_matrix(fitted.raw_covariance),
        "sigma": to_float(fitted.sigma),
        "df_residual": int(fitted.df_residual),
        "n": int(fitted.n),
        "x_min": to_float(fitted.x_min),
        "x_max": to_float(fitted.x_max),
        "weighted": bool(fitted.weighted),
        "level": to_float(fitted.level),
    }
    if fitted.weighting != "relative":  # relative documents stay exactly as before
        body["weighting"] = str(fitted.weighting)
    body["checksum"] = checksum(body, written=True)  # every float above went through to_float
    return body


def from_document(doc: Mapping[str, Any], *, field_prefix: str = "") -> FittedPolynomial:
    """Read and verify a fitted-model document.

    Parameters
    ----------
    doc : mapping
        A document as written by :func:`to_document` (after any JSON round trip).
    field_prefix : str
        Prepended to field names in errors (the web layer passes ``"fitted_model."``).

    Returns
    -------
    FittedPolynomial

    Raises
    ------
    DocumentError
        Not a mapping, unsupported ``schema_version``, unknown or missing field,
        wrong type or shape, inconsistent content, or checksum mismatch. ``field``
        names the offending field.
    """
    reader = DocumentReader(doc, field_prefix)
    values = reader.read()
    p = len(values["terms"])
    basis = np.asarray(values["basis_coefficients"], dtype=float)
    raw = np.asarray(values["raw_coefficients"], dtype=float)
    r_factor = np.asarray(values["r_factor"], dtype=float)
    covariance = np.asarray(values["raw_covariance"], dtype=float)
    reader.check_consistency(values, basis, raw, r_factor, covariance, p)
    reader.check_checksum(values)
    return FittedPolynomial(
        degree=values["degree"], intercept=values["intercept"],
        transform_x=values["transform_x"], transform_y=values["transform_y"],
        terms=tuple(values["terms"]), x_shift=values["x_shift"], x_scale=values["x_scale"],
        basis_coefficients=frozen_array(basis), r_factor=frozen_array(r_factor),
        raw_coefficients=frozen_array(raw), raw_covariance=frozen_array(covariance),
        sigma=values["sigma"], df_residual=values["df_residual"], n=values["n"],
        x_min=values["x_min"], x_max=values["x_max"], weighted=values["weighted"],
        level=values["level"], weighting=values.get("weighting", "relative"),
    )
