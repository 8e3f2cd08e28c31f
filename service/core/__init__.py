"""The numerical core: numpy/scipy/statsmodels only, no web framework, no schemas.

Public surface (import from here, not from submodules)::

    fit_series(x, y, weights=None, *, model=ModelSpec(), options=FitOptions()) -> FitReport
    predict(fitted, x, *, level=None, m=1, weights=None) -> Prediction
    read_document(doc, *, field_prefix="") -> fitted model
    FAMILIES, family(name), family_of(fitted)        the model-family registry

each dispatching to the family that ``model.family`` (or the fitted model) names, plus
the option types in :mod:`service.core.spec`, the result types in
:mod:`service.core.results` and the errors in :mod:`service.core.errors`.

Layout: :mod:`service.core.families` (the registry) sits above the family folders
(``polynomial/``), which sit above the shared residual checks (``checks/``) and the
data handling (``data/``); ``models/`` holds the portable document and inverse
prediction, ``batch/`` the many-series engine, ``compiled/`` the numba cache stamp
and warm-up. Nothing below imports anything above (``tests/test_layers.py``).

Weights are inverse variances (``1/sd²``). See :mod:`service.core.polynomial.fit`
for the fit, :mod:`service.core.polynomial.selection` for the degree-choice rules and
:mod:`service.core.polynomial.bands` for the bands and the retransformation caveat.
"""

from service.core.compiled.cache import ensure_fresh as _ensure_fresh
from service.core.errors import (  # noqa: F401
    DataError,
    DesignError,
    DocumentError,
    FitError,
    SpecError,
    TransformError,
)
from service.core.families import (  # noqa: F401
    FAMILIES,
    Family,
    family,
    family_of,
    fit_series,
    predict,
    read_document,
)
from service.core.results import (  # noqa: F401
    AnovaRow,
    Candidate,
    Coefficient,
    Diagnostics,
    FitReport,
    FitStatistics,
    FittedPolynomial,
    LackOfFit,
    Notice,
    Prediction,
    Selection,
    TestResult,
    TrustFlag,
)
from service.core.spec import FitOptions, GridSpec, ModelSpec  # noqa: F401

_ensure_fresh()  # before any kernel runs: no stale machine code from an older source
