"""Quantities derived from one parameter (half-lives, widths), with their limits.

The standard error is the delta method's, ``|g'(theta)| SE(theta)``, and the
Wald limits use the same critical value as the parameter's own. A monotone
function of one parameter maps that parameter's profile-likelihood limits onto
the derived quantity's: the likelihood does not depend on how the curve is
parameterized, so this costs nothing and is exact (Bates & Watts 1988, ch. 6).
"""

from __future__ import annotations

import math

import numpy as np

from service.core.nonlinear.builtin.definition import Builtin, Derived
from service.core.nonlinear.report import DerivedRow, NonlinearReport, ParameterRow
from service.core.results import Notice

NAN = float("nan")


def derived_rows(family: Builtin, report: NonlinearReport) -> tuple[DerivedRow, ...]:
    """One row per derived quantity of ``family`` whose parameter was fitted (not fixed)."""
    rows = {row.term: row for row in report.coefficients}
    return tuple(_row(d, rows[d.parameter]) for d in family.derived if d.parameter in rows)


def derived_notices(family: Builtin, report: NonlinearReport) -> tuple[Notice, ...]:
    """A ``derived_not_computed`` notice per derived quantity left null because its
    parameter's estimate lies outside the range where the quantity is defined."""
    rows = {row.term: row for row in report.coefficients}
    out = []
    for d in family.derived:
        row = rows.get(d.parameter)
        if row is None or not math.isfinite(row.estimate):
            continue
        if d.domain[0] < row.estimate < d.domain[1]:
            continue
        out.append(Notice("derived_not_computed", (
            f"{d.name} is null: {d.parameter} = {row.estimate:.6g} lies outside "
            f"{_interval(d.parameter, d.domain)}, where {d.name} is defined.")))
    return tuple(out)


def _interval(name: str, domain: tuple[float, float]) -> str:
    lo, hi = domain
    if math.isinf(hi):
        return f"{name} > {lo:g}"
    return f"{name} < {hi:g}" if math.isinf(lo) else f"{lo:g} < {name} < {hi:g}"


def _row(derived: Derived, row: ParameterRow) -> DerivedRow:
    lo_dom, hi_dom = derived.domain
    theta = row.estimate
    if not lo_dom < theta < hi_dom:  # outside the range where the quantity means anything
        return DerivedRow(derived.name, derived.meaning, derived.parameter, NAN, NAN, NAN, NAN,
                          NAN, NAN, "not_computed", "not_computed")
    with np.errstate(all="ignore"):  # numpy scalars: an overflow is inf, never an exception
        value = float(derived.value(np.float64(theta)))
        slope = float(derived.slope(np.float64(theta)))
    se = abs(slope) * row.std_error
    crit = (row.upper - theta) / row.std_error if row.std_error > 0 else NAN
    low = _mapped(derived, row.profile_lower, row.profile_lower_status)
    high = _mapped(derived, row.profile_upper, row.profile_upper_status)
    if slope < 0:  # decreasing: the parameter's upper limit gives the lower one
        low, high = high, low
    return DerivedRow(derived.name, derived.meaning, derived.parameter, value, se,
                      value - crit * se, value + crit * se, low[0], high[0], low[1], high[1])


def _mapped(derived: Derived, limit: float, status: str) -> tuple[float, str]:
    if status not in ("found", "bound") or not math.isfinite(limit):
        return NAN, status
    lo_dom, hi_dom = derived.domain
    if not lo_dom < limit < hi_dom:
        return NAN, "unbounded"
    with np.errstate(all="ignore"):
        return float(derived.value(np.float64(limit))), status
