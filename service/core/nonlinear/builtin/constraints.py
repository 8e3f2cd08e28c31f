"""Estimates that break a built-in family's documented constraint (``GET /v1/families``).

The solver does not enforce the constraints a family documents in words; most hold by
construction (a log-scale ec50 <= 0 makes the curve not finite, and the reported forms
are canonical), but a few can be broken by an unconstrained least-squares optimum. Those
are listed in :data:`POSITIVE`; an estimate <= 0 there gets a
``parameter_outside_constraint`` notice naming it, the constraint and, for
Michaelis-Menten, the pole the curve then has at ``x = -km``.
"""

from __future__ import annotations

import math

from service.core.nonlinear.builtin.definition import Builtin
from service.core.nonlinear.report import NonlinearReport
from service.core.results import Notice

POSITIVE = {"michaelis_menten": ("km",), "logistic5": ("asymmetry",),
            "weibull": ("tau", "shape")}


def constraint_notices(family: Builtin, report: NonlinearReport, x_min: float,
                       x_max: float) -> tuple[Notice, ...]:
    """One notice per estimate of :data:`POSITIVE` that is not > 0."""
    rows = {row.term: row for row in report.coefficients}
    rules = {p.name: p.constraint for p in family.parameters}
    out = []
    for name in POSITIVE.get(family.name, ()):
        row = rows.get(name)
        if row is None or not math.isfinite(row.estimate) or row.estimate > 0:
            continue
        message = (f"{name} = {row.estimate:.6g} breaks its constraint ({rules[name]}), so "
                   f"this is not a {family.name} curve of the documented kind")
        if family.name == "michaelis_menten" and x_min <= -row.estimate <= x_max:
            message += f": it has a pole at x = {-row.estimate:.6g}, inside the data range"
        out.append(Notice("parameter_outside_constraint", message + (
            f". The data may not suit this family: try another, or bound {name} with "
            "model.lower.")))
    return tuple(out)
