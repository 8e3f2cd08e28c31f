"""Typed errors raised by the numerical core.

Every error is a ``ValueError`` so that plain Python callers can catch it
without importing anything from Curvewise. The web layer maps each class to
an HTTP status (all of them to 422 today) and puts ``field`` and ``fix`` into
the problem-details body.

Hierarchy::

    FitError(ValueError)            base: something about this input cannot be fitted
    ├── DataError                   the arrays themselves: lengths, NaN/inf, empty, weights <= 0
    │   └── TransformError          a value is outside the domain of the requested transform,
    │                               or an x outside a curve defined for x >= 0 only
    ├── DesignError                 the design cannot support the model: too few points or
    │                               distinct x for the degree, rank deficiency
    ├── SpecError                   the model/options do not make sense together
    └── DocumentError               a fitted-model document is malformed, of an unknown
                                    version, or fails its checksum
"""

from __future__ import annotations

INDEX_LIST_CAP = 10  # offending indices named in one message; the rest are counted


def also_at(indices) -> str:
    """A sentence naming the offending indices after the first (empty when there is one).

    ``"The same goes for indices 3, 7, 12 and 40 more."`` (at most :data:`INDEX_LIST_CAP`
    named). The request schemas word their messages the same way (``schemas.fields``; the
    layers share no code).
    """
    more = [int(i) for i in list(indices)[1:]]
    if not more:
        return ""
    shown = ", ".join(map(str, more[:INDEX_LIST_CAP]))
    rest = len(more) - INDEX_LIST_CAP
    listed = f"{shown} and {rest} more" if rest > 0 else shown
    return f" The same goes for {'index' if len(more) == 1 else 'indices'} {listed}."


class FitError(ValueError):
    """Base class: this input cannot be fitted as asked.

    Parameters
    ----------
    message : str
        What is wrong, in plain words.
    field : str or None
        Dotted/indexed path of the offending request field (``"y"``,
        ``"weights[3]"``, ``"model.degree"``), or None when it is the whole input.
    fix : str
        What the caller should do about it.
    code : str
        Stable machine-readable reason (snake_case), used in metrics and problem ``type``.
    details : tuple of (str, str)
        Further ``(field, message)`` pairs when one error has several causes (each
        candidate of a comparison that could not be fitted); empty otherwise.
    """

    code = "unfittable_input"

    def __init__(self, message: str, *, field: str | None = None, fix: str = "",
                 code: str | None = None, details: tuple[tuple[str, str], ...] = ()) -> None:
        super().__init__(message)
        self.message = message
        self.field = field
        self.fix = fix
        self.details = tuple(details)
        if code is not None:
            self.code = code

    def __reduce__(self):  # keep pickling (multiprocessing, Dask) lossless
        return (_rebuild, (type(self), self.message, self.field, self.fix, self.code,
                           self.details))


def _rebuild(cls, message, field, fix, code, details=()):
    return cls(message, field=field, fix=fix, code=code, details=details)


class DataError(FitError):
    """The data arrays are unusable as given (length, finiteness, emptiness, weights)."""

    code = "invalid_data"


class TransformError(DataError):
    """A value lies outside the domain of the model: of the requested transform (e.g. log of
    x <= 0), or an x < 0 for a curve defined for x >= 0 only (a log-x dose-response curve,
    a power of x: :mod:`service.core.nonlinear.builtin.domain`)."""

    code = "transform_domain"


class DesignError(FitError):
    """The points cannot support the requested model (too few, or too few distinct x)."""

    code = "insufficient_design"


class SpecError(FitError):
    """The model specification or options are inconsistent or over a limit."""

    code = "invalid_spec"


class DocumentError(FitError):
    """A fitted-model document is malformed, of an unknown version, or tampered with."""

    code = "invalid_document"
