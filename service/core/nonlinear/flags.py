"""Trust flags of a nonlinear fit that no residual check can see: convergence, bounds,
poorly determined or redundant parameters, and a failed goodness-of-fit test.

Thresholds (each flag's evidence carries the number and the cut-off):

* ``not_converged`` (serious): the solver stopped without meeting the Bates &
  Watts relative-offset criterion; the numbers describe where it stopped.
* ``parameter_at_bound`` (caution): an estimate sits on a bound the caller
  set; its standard error and Wald limits ignore the bound (its profile limit
  on that side is the bound).
* ``parameters_not_identifiable`` (serious): the Jacobian is rank deficient
  at the estimates (some parameter combinations are not determined). The rank is
  that of the free parameters' columns (a parameter held on a bound has no column
  in the solver's tangent plane), so it is compared with the free count.
* ``parameters_nearly_redundant`` (caution): some |correlation| above 0.99
  (common practice; Bates & Watts 1988 discuss the symptom).
* ``poorly_determined_parameter`` (caution): a relative standard error above
  50% (common practice) or a profile limit that does not exist (the data do
  not bound the parameter on that side).
* ``chi_square_fit_failed`` (serious): with known measurement SDs, the
  weighted residual sum of squares is too large for chi²(n - p) at alpha.
"""

from __future__ import annotations

import numpy as np

from service.core.checks.known_sd import chi_square_flag
from service.core.nonlinear.report import FitInfo, ParameterRow
from service.core.results import TestResult, TrustFlag

CORRELATION_CUT = 0.99
RELATIVE_SE_CUT = 0.5


def nonlinear_flags(info: FitInfo, rows: tuple[ParameterRow, ...], correlation: np.ndarray,
                    gof: TestResult | None, alpha: float) -> list[TrustFlag]:
    """The nonlinear-only flags, most severe kinds first."""
    out: list[TrustFlag] = []
    names = [r.term for r in rows]
    if not info.converged:
        out.append(TrustFlag("not_converged", "serious",
                             f"The fit did not converge ({info.termination}): {info.message} "
                             "Try other start values or bounds.",
                             {"termination": info.termination,
                              "relative_offset": info.relative_offset,
                              "iterations": info.iterations}))
    free = sum(status == "free" for status in info.bound_status)
    if info.jacobian_rank < free:
        out.append(TrustFlag("parameters_not_identifiable", "serious",
                             "Some parameters cannot be told apart from these data (the "
                             "Jacobian is rank deficient): fix one of them or rewrite the model.",
                             {"rank": info.jacobian_rank, "parameters": free}))
    at_bound = [n for n, s in zip(names, info.bound_status, strict=True) if s != "free"]
    if at_bound:
        out.append(TrustFlag("parameter_at_bound", "caution",
                             f"{', '.join(at_bound)} sit(s) on a bound you set; the standard "
                             "errors and Wald limits do not account for the bound (the "
                             "profile limits do).",
                             {"parameters": tuple(at_bound)}))
    pairs = _correlated_pairs(names, correlation)
    if pairs:
        out.append(TrustFlag("parameters_nearly_redundant", "caution",
                             "Some parameters are almost perfectly correlated: the data "
                             "determine a combination of them, not each one.",
                             {"pairs": tuple(pairs), "threshold": CORRELATION_CUT}))
    poor = [r.term for r in rows if _poorly_determined(r)]
    if poor:
        out.append(TrustFlag("poorly_determined_parameter", "caution",
                             f"{', '.join(poor)}: relative standard error above "
                             f"{RELATIVE_SE_CUT:.0%} or a profile limit that does not exist; "
                             "the data barely constrain it.",
                             {"parameters": tuple(poor), "relative_se": RELATIVE_SE_CUT}))
    failed = chi_square_flag(gof, alpha)
    if failed is not None:
        out.append(failed)
    return out


def _poorly_determined(row: ParameterRow) -> bool:
    relative = abs(row.std_error / row.estimate) if row.estimate != 0 else np.inf
    unbounded = "unbounded" in (row.profile_lower_status, row.profile_upper_status)
    return bool(unbounded or not relative <= RELATIVE_SE_CUT)


def _correlated_pairs(names: list[str], corr: np.ndarray) -> list[tuple[str, str]]:
    with np.errstate(invalid="ignore"):
        i, j = np.nonzero(np.triu(np.abs(corr) > CORRELATION_CUT, k=1))
    return [(names[a], names[b]) for a, b in zip(i.tolist(), j.tolist(), strict=True)]
