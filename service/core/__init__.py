"""The numerical core: numpy/scipy/statsmodels only, no web framework, no schemas.

Public surface (import from here, not from submodules)::

    fit_series(x, y, weights=None, *, model=ModelSpec(), options=FitOptions()) -> FitReport
    predict(fitted, x, *, level=None, m=1) -> Prediction

plus the option types in :mod:`service.core.spec`, the result types in
:mod:`service.core.results` and the errors in :mod:`service.core.errors`.
"""

from service.core.errors import (  # noqa: F401
    DataError,
    DesignError,
    DocumentError,
    FitError,
    SpecError,
    TransformError,
)
from service.core.results import FitReport, FittedPolynomial, Prediction  # noqa: F401
from service.core.spec import FitOptions, GridSpec, ModelSpec  # noqa: F401
