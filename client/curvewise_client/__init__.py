"""Python client for the Curvewise service (standard library only).

>>> from curvewise_client import Client
>>> client = Client("http://127.0.0.1:8000")            # doctest: +SKIP
>>> fit = client.fit(x, y, max_degree=4)                # doctest: +SKIP
>>> fit.chosen_degree, [row.term for row in fit.anova]  # doctest: +SKIP

Errors are described in :mod:`curvewise_client.errors`; results (each with
``to_dict()`` / ``to_json()``) in :mod:`curvewise_client.results`; pandas helpers (``pip install
curvewise-client[pandas]``) in :mod:`curvewise_client.frames`.
"""

__version__ = "0.1.0"

from curvewise_client.client import Client  # noqa: E402
from curvewise_client.errors import (  # noqa: E402
    ApiError,
    BadRequest,
    ComputeTimeout,
    ConnectError,
    CurvewiseError,
    Forbidden,
    InputError,
    NotFound,
    PayloadTooLarge,
    Problem,
    ProtocolError,
    RequestTimeout,
    ServerError,
    ServiceUnavailable,
    TooManyRequests,
    TransportError,
    Unauthorized,
    UnprocessableInput,
    UnsupportedMediaType,
)
from curvewise_client.results import (  # noqa: E402
    AnovaRow,
    BatchItem,
    BatchResult,
    Candidate,
    Coefficient,
    DerivedQuantity,
    Diagnostics,
    Estimate,
    Estimates,
    Families,
    Family,
    FamilyOption,
    Figure,
    FitInfo,
    FitResult,
    Grid,
    Limits,
    ModelInfo,
    Notice,
    PredictionRow,
    Predictions,
    Selection,
    Statistics,
    TestResult,
    TrustFlag,
)
from curvewise_client.transport import HTTPTransport  # noqa: E402
from curvewise_client.wsgi import WSGITransport  # noqa: E402

__all__ = [
    "AnovaRow", "ApiError", "BadRequest", "BatchItem", "BatchResult", "Candidate", "Client",
    "Coefficient", "ComputeTimeout", "ConnectError", "CurvewiseError", "DerivedQuantity",
    "Diagnostics", "Estimate",
    "Estimates", "Families", "Family", "FamilyOption", "Figure", "FitInfo", "FitResult",
    "Forbidden", "Grid", "HTTPTransport", "InputError", "Limits", "ModelInfo", "NotFound", "Notice",
    "PayloadTooLarge",
    "PredictionRow", "Predictions", "Problem", "ProtocolError", "RequestTimeout", "Selection",
    "ServerError", "ServiceUnavailable", "Statistics", "TestResult", "TooManyRequests",
    "TransportError", "TrustFlag", "Unauthorized", "UnprocessableInput", "UnsupportedMediaType",
    "WSGITransport",
]
