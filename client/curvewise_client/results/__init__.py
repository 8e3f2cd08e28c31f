"""Typed, frozen results mirroring the service's JSON answers.

Every field has the wire name. JSON ``null`` (an undefined statistic) is
``None``; JSON arrays become tuples and objects become read-only dicts
(:class:`FrozenDict`), so a result cannot be changed after it is built, yet
``json.dumps`` takes its parts as they are. Top-level results also keep the
whole decoded answer as ``raw`` (read-only), so members added to the service
later are never lost. Builders are tolerant: a member the service did not send
is ``None`` (or empty), never an exception. Every result has ``to_dict()``,
``to_json()``, ``from_dict()`` and ``from_json()`` and a short repr
(:mod:`curvewise_client.results.plain`).
"""

from curvewise_client.results.base import EMPTY, FrozenDict, build, freeze, thaw  # noqa: F401
from curvewise_client.results.batch import BatchItem, BatchResult  # noqa: F401
from curvewise_client.results.fit import (  # noqa: F401
    AnovaRow,
    Candidate,
    Coefficient,
    ComparedModel,
    Comparison,
    DerivedQuantity,
    Diagnostics,
    FitInfo,
    FitResult,
    Grid,
    ModelInfo,
    NestedTest,
    Notice,
    Selection,
    Statistics,
    TestResult,
    TrustFlag,
)
from curvewise_client.results.models import (  # noqa: F401
    Estimate,
    Estimates,
    PredictionRow,
    Predictions,
    WorkingRange,
)
from curvewise_client.results.plain import Result  # noqa: F401
from curvewise_client.results.service import (  # noqa: F401
    Families,
    Family,
    FamilyOption,
    FamilyParameter,
    Figure,
    Limits,
    Reading,
)
