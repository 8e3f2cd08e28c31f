"""The model-family registry: each family's name and what it provides.

A family is a subpackage of :mod:`service.core` plus one :class:`Family` entry in
:data:`FAMILIES`. The web layer (``/v1/fit``, ``/v1/families``, ``/v1/predict``,
``/v1/invert``), the document reader and the batch path consult this registry
instead of assuming one family:

* :func:`fit_series` fits one series with the family that ``model.family`` names;
* :func:`read_document` reads a fitted-model document with the family it names;
* :func:`family_of` finds the family of a fitted model (predict, invert).
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import dataclass
from functools import partial
from types import MappingProxyType
from typing import Any

from service.core.errors import DocumentError, SpecError
from service.core.models import (
    calibration,
    curve_document,
    curve_figures,
    curve_inverse,
    document,
    inverse,
    precision_profile,
)
from service.core.nonlinear import analysis as nonlinear_analysis
from service.core.nonlinear import expression_family
from service.core.nonlinear.builtin import domain as builtin_domain
from service.core.nonlinear.builtin import fit as builtin_fit
from service.core.nonlinear.builtin import spec_check as builtin_spec
from service.core.nonlinear.builtin.catalogue import BUILTINS
from service.core.nonlinear.builtin.definition import Builtin, ParameterInfo
from service.core.nonlinear.report import FittedCurve
from service.core.polynomial import bands as polynomial_bands
from service.core.polynomial import fit as polynomial_fit
from service.core.polynomial.spec_check import check_spec as polynomial_spec
from service.core.results import FitReport, FittedPolynomial, Prediction
from service.core.spec import SELECT_METHODS, TRANSFORMS, FitOptions, ModelSpec


@dataclass(frozen=True, slots=True)
class Family:
    """What one model family provides.

    Parameters
    ----------
    name, description : str
        The family's wire name and a one-sentence description.
    fitted_type : type
        The frozen fitted-model object its fits carry (``FitReport.model``).
    fit : callable
        ``fit(x, y, weights, *, model, options) -> FitReport``.
    check_spec : callable
        ``check_spec(model, options)``: raises ``SpecError`` naming the field.
    predict : callable
        ``predict(fitted, x, *, level=None, m=1, weights=None) -> Prediction``.
    write_document, read_document : callable or None
        ``write_document(fitted) -> dict`` and
        ``read_document(doc, *, field_prefix="") -> fitted``; None while the
        family has no portable document.
    invert : callable or None
        ``invert(fitted, y, *, replicates=1, level=None, weights=None)``; None when the
        family cannot be read backwards.
    sensitivity, figures_of_merit : callable or None
        Calibration slope ``dy/dx`` at x, and detection/quantification limits.
    compiled_batch : bool
        The batch engine has a compiled per-series kernel for this family;
        otherwise batch fits go through :attr:`fit` one series at a time.
    select_methods, transforms : tuple of str
        The selection rules and transforms the family accepts.
    generalizes : tuple of str
        Families that are special cases of this one (nested: the extra-sum-of-squares
        F test of :mod:`service.core.compare` applies between them).
    equation : str or None
        The family's equation, ``y = ...`` (None when the caller writes it).
    parameters : tuple of ParameterInfo
        Each parameter's name, meaning (with unit) and constraint; empty when the
        caller names them.
    precision_profile : callable or None
        ``precision_profile(fitted, *, cv_limit, replicates)``: the working range of a
        dose-response calibration (logistic4, logistic5); None otherwise.
    """

    name: str
    description: str
    fitted_type: type
    fit: Callable[..., FitReport]
    check_spec: Callable[[ModelSpec, FitOptions], Any]
    predict: Callable[..., Prediction]
    write_document: Callable[[Any], dict] | None
    read_document: Callable[..., Any] | None
    invert: Callable[..., Any] | None = None
    sensitivity: Callable[..., Any] | None = None
    figures_of_merit: Callable[..., Any] | None = None
    compiled_batch: bool = False
    select_methods: tuple[str, ...] = ()
    transforms: tuple[str, ...] = ()
    generalizes: tuple[str, ...] = ()
    equation: str | None = None
    parameters: tuple[ParameterInfo, ...] = ()
    precision_profile: Callable[..., Any] | None = None


POLYNOMIAL = Family(
    name="polynomial",
    description="Polynomial in x (optionally transformed) by least squares, fixed degree or "
                "chosen from candidates; every lower power is kept.",
    fitted_type=FittedPolynomial, fit=polynomial_fit.fit_series, check_spec=polynomial_spec,
    predict=polynomial_bands.predict, write_document=document.to_document,
    read_document=document.from_document, invert=inverse.invert,
    sensitivity=calibration.sensitivity, figures_of_merit=calibration.figures_of_merit,
    compiled_batch=True, select_methods=SELECT_METHODS, transforms=TRANSFORMS)

_CURVE_INVERSE = {"invert": curve_inverse.invert_curve,
                  "sensitivity": curve_inverse.sensitivity,
                  "figures_of_merit": curve_figures.figures_of_merit}
"""Reading a nonlinear curve backwards (where it is monotone over the calibrated range)."""

EXPRESSION = Family(
    name="expression",
    description="The caller's own equation in x and named parameters (a plain arithmetic "
                "expression), fitted by nonlinear least squares from given start values.",
    fitted_type=FittedCurve, fit=expression_family.fit_series,
    check_spec=expression_family.check_spec, predict=nonlinear_analysis.predict,
    write_document=curve_document.to_curve_document,
    read_document=curve_document.from_curve_document, **_CURVE_INVERSE)



NESTED_IN = {"logistic5": ("logistic4",),    # asymmetry = 1
             "weibull": ("exponential",)}      # shape = 1, tau = 1/k
"""Built-in families that contain others as a special case (for the F test of a comparison)."""


def _builtin(entry: Builtin) -> Family:
    """The registry entry of a built-in nonlinear family (automatic start values)."""
    return Family(
        name=entry.name, description=entry.description, fitted_type=FittedCurve,
        fit=partial(builtin_fit.fit_series, entry), check_spec=partial(builtin_spec.check_spec,
                                                                       entry),
        predict=partial(builtin_domain.predict, entry),
        write_document=curve_document.to_curve_document,
        read_document=curve_document.from_curve_document, equation=entry.equation_text(),
        parameters=entry.parameters, **_CURVE_INVERSE,
        generalizes=NESTED_IN.get(entry.name, ()),
        precision_profile=(precision_profile.precision_profile
                           if entry.name in precision_profile.PROFILE_FAMILIES else None))


BUILTIN_FAMILIES = tuple(_builtin(entry) for entry in BUILTINS.values())
"""One entry per built-in family (logistic4, logistic5, exponential, ...)."""

FAMILIES: Mapping[str, Family] = MappingProxyType(
    {f.name: f for f in (POLYNOMIAL, EXPRESSION, *BUILTIN_FAMILIES)})
"""Every family by name, in the order ``/v1/families`` lists them."""


def family(name: str, *, field: str = "model.family") -> Family:
    """The registered family called ``name``; ``SpecError`` naming ``field`` otherwise."""
    found = FAMILIES.get(name)
    if found is None:
        names = ", ".join(f'"{n}"' for n in FAMILIES)
        fix = f"Use family = {names}." if len(FAMILIES) == 1 else f"Use one of {names}."
        raise SpecError(f"Unknown model family {name!r}.", field=field, fix=fix)
    return found


def family_of(fitted: Any) -> Family:
    """The family whose fits carry objects of ``type(fitted)`` (the one it names, if any)."""
    named = FAMILIES.get(getattr(fitted, "family", None) or "")
    if named is not None and isinstance(fitted, named.fitted_type):
        return named
    for entry in FAMILIES.values():
        if isinstance(fitted, entry.fitted_type):
            return entry
    raise TypeError(f"{type(fitted).__name__} is not the fitted model of a registered family")


_DEFAULT_MODEL, _DEFAULT_OPTIONS = ModelSpec(), FitOptions()


def fit_series(x, y, weights=None, *, model: ModelSpec = _DEFAULT_MODEL,
               options: FitOptions = _DEFAULT_OPTIONS) -> FitReport:
    """Fit one series with the family ``model.family`` names (see that family's ``fit``)."""
    return family(model.family).fit(x, y, weights, model=model, options=options)


def predict(fitted: Any, x, *, level: float | None = None, m: int = 1,
            weights=None) -> Prediction:
    """Predictions with bands at ``x`` from any family's fitted model; ``weights``: the
    weight of a new observation at each x (default 1). A fit without residual variance
    (sigma = 0) gives no bands (:func:`.checks.exact_fit.without_intervals`)."""
    return family_of(fitted).predict(fitted, x, level=level, m=m, weights=weights)


def read_document(doc: Any, *, field_prefix: str = "") -> Any:
    """Read a fitted-model document with the family it names.

    A document that names no registered family is read by the first family's
    reader (version-1 documents are all polynomial), which names the bad field.
    """
    name = doc.get("family") if isinstance(doc, Mapping) else None
    entry = FAMILIES.get(name) if isinstance(name, str) else None
    if entry is not None and entry.read_document is None:
        raise DocumentError(f"Documents of the {name} family cannot be read yet.",
                            field=f"{field_prefix}family",
                            fix="Send a document of a family that GET /v1/families lists "
                                "with a portable document.")
    reader = (entry or next(iter(FAMILIES.values()))).read_document
    return reader(doc, field_prefix=field_prefix)
