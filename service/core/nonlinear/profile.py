"""Profile-likelihood limits of every parameter (:func:`profile_limits`).

For parameter ``j`` the profile sum of squares ``S~(b)`` is the least RSS with
``theta_j = b`` fixed and the others re-fitted; the profile t statistic is
``tau(b) = sign(b - est_j) sqrt(S~(b) - S(est)) / s`` (Bates & Watts 1988,
sec. 6.1; Seber & Wild 1989, sec. 5.2), with ``s`` the residual SD (relative
weights) or 1 (known-SD weights, where ``tau^2`` is the likelihood-ratio
statistic). The limits are where ``tau = -c`` and ``tau = +c`` with ``c`` the
two-sided t (or normal) quantile: for a model linear in its parameters they
coincide with the Wald limits, and they follow the curvature otherwise.

Search, per side: the first trial is the Wald limit; later trials step on by
Newton's rule on ``tau`` (its derivative is known without extra refits:
``d tau / d b = (dS~/db) / (2 s^2 tau)``, and ``dS~/db = -2 r' W J_j`` by the
envelope theorem), at least half and at most four standard errors a step,
until ``|tau|`` passes ``c``. The bracketed root is then refined by a
safeguarded Newton iteration (bisection whenever Newton leaves the bracket).
Each refit is warm-started from the neighbouring profile point moved along
the linearised path ``d theta / d b``. A side is ``"unbounded"`` (limit NaN)
when ``|tau|`` stays below ``c`` out to ``max_se`` standard errors or up to where
the model stops being finite. A bound the caller set truncates the confidence
set ``{b inside the bounds : |tau(b)| <= c}``: when ``|tau|`` stays below ``c``
up to the bound (or the estimate is on it), that side's limit is the bound
itself, with status ``"bound"`` (the data alone would allow more).
"""

from __future__ import annotations

import math
from typing import NamedTuple

import numpy as np

from service.core.errors import SpecError
from service.core.nonlinear.inference import check_options, covariance_scale, critical_value
from service.core.nonlinear.profile_inner import Constrained, minimize_fixed
from service.core.nonlinear.results import Notice, ProfileLimit, ProfileLimits, Solution
from service.core.nonlinear.tangent import tangent, unscaled_covariance

MAX_REFITS_PER_SIDE = 60
MIN_STEP_SE, MAX_STEP_SE = 0.5, 4.0


class _Point(NamedTuple):
    b: float
    delta: float  # S~(b) - S(est)
    tau: float
    dtau: float
    fit: Constrained


class _Side(NamedTuple):
    limit: float
    status: str  # "found" | "bound" | "unbounded" | "not_computed"
    reason: str
    refits: int


@np.errstate(all="ignore")  # floating-point trouble is data here, never a warning
def profile_limits(solution: Solution, *, level: float = 0.95, weight_mode: str = "relative",
                   parameters: tuple[str, ...] | None = None, max_se: float = 30.0,
                   xtol: float = 1e-9) -> ProfileLimits:
    """Profile-likelihood confidence limits of every parameter of a :class:`Solution`.

    Parameters
    ----------
    solution : Solution
        A converged fit from :func:`~service.core.nonlinear.solver.solve`.
    level : float
        Confidence level.
    weight_mode : {"relative", "known_sd"}
        As in :func:`~service.core.nonlinear.inference.infer`.
    parameters : tuple of str, optional
        Profile only these parameters (default: all), in the model's order.
    max_se : float
        How far (in Wald standard errors) each side is searched before it is
        declared unbounded.
    xtol : float
        Limits are located to ``xtol`` Wald standard errors.

    Returns
    -------
    ProfileLimits
        One row per profiled parameter with a status per side; a
        ``profile_unbounded``, ``profile_at_bound`` or ``profile_not_computed``
        notice per parameter with a side of that status (the last only when the
        side failed for a reason of its own, not the whole fit's).

    Raises
    ------
    SpecError
        Unknown ``weight_mode``, ``level`` outside (0, 1), or an unknown name
        in ``parameters`` (field ``"profile.parameters"``).
    """
    check_options(weight_mode, level)
    problem = solution.problem
    n, p = problem.n, problem.p
    crit = critical_value(weight_mode, n - p, level)
    sigma, factor = covariance_scale(solution, weight_mode)
    scale = 1.0 if weight_mode == "known_sd" else sigma
    cov = np.full((p, p), np.nan)
    jw = problem.sqrt_weights[:, None] * solution.jacobian
    if np.isfinite(jw).all():
        cov = factor * unscaled_covariance(tangent(jw))
    reason = _why_not(solution, crit, scale, cov)
    names = problem.parameter_names
    unknown = sorted(set(parameters or ()) - set(names))
    if unknown:
        raise SpecError(f"no parameter named {', '.join(unknown)}", field="profile.parameters",
                        fix=f"choose from {', '.join(names)}")
    limits, notices = [], []
    for j, name in enumerate(names):
        if parameters is not None and name not in parameters:
            continue
        est = float(solution.estimates[j])
        if reason:
            limits.append(ProfileLimit(name, est, np.nan, np.nan, "not_computed",
                                       "not_computed", reason, 0))
            continue
        se = math.sqrt(cov[j, j])
        follow = cov[:, j] / cov[j, j]
        sides = [_search(solution, j, sign, crit, scale, se, follow, max_se, xtol)
                 for sign in (-1.0, 1.0)]
        why = "; ".join(s.reason for s in sides if s.reason)
        limits.append(ProfileLimit(name, est, sides[0].limit, sides[1].limit, sides[0].status,
                                   sides[1].status, why, sides[0].refits + sides[1].refits))
        notices += _side_notices(name, sides)
    return ProfileLimits(tuple(limits), level, crit, weight_mode, tuple(notices))


_SIDE_NOTICES = (("profile_unbounded", "unbounded"), ("profile_at_bound", "bound"),
                 ("profile_not_computed", "not_computed"))


def _side_notices(name: str, sides: list[_Side]) -> list[Notice]:
    """One notice per status other than found, with the reasons of the sides that have it
    (a side not computed for the whole fit's reason, e.g. no convergence, is told by the
    fit's own notices and never reaches here)."""
    out = []
    for code, status in _SIDE_NOTICES:
        reasons = [s.reason for s in sides if s.status == status and s.reason]
        if reasons:
            out.append(Notice(code, f"{name}: {'; '.join(reasons)}"))
    return out


def _why_not(solution: Solution, crit: float, scale: float, cov: np.ndarray) -> str:
    if not solution.converged:
        return f"the fit did not converge ({solution.termination})"
    if not np.isfinite(crit):
        return "no residual degrees of freedom"
    if not (np.isfinite(scale) and scale > 0):
        return "the residual standard deviation is zero or undefined (an exact fit)"
    if not np.isfinite(np.diag(cov)).all() or not (np.diag(cov) > 0).all():
        return "standard errors are not available (rank-deficient Jacobian)"
    return ""


def _evaluate(solution, j, b, warm_from: _Point, sign, scale) -> _Point | None:
    """Refit at ``b``, warm-started along the linearised path through ``warm_from``."""
    theta = warm_from.fit.theta + (b - warm_from.b) * warm_from.fit.follow
    theta[j] = b
    problem = solution.problem
    theta = np.clip(theta, problem.lower, problem.upper)
    fit = minimize_fixed(problem, j, theta)
    if fit is None:
        return None
    delta = fit.rss - solution.rss
    tau = sign * math.sqrt(max(delta, 0.0)) / scale
    dtau = fit.slope / (2.0 * scale * scale * tau) if tau != 0 else np.inf
    return _Point(b, delta, tau, dtau, fit)


def _search(solution, j, sign, crit, scale, se, follow, max_se, xtol) -> _Side:
    problem = solution.problem
    est = float(solution.estimates[j])
    bound = problem.lower[j] if sign < 0 else problem.upper[j]
    side = "lower" if sign < 0 else "upper"
    if est == bound:
        return _Side(float(bound), "bound", f"{side}: the estimate is on the bound you set, "
                     "so the limit is the bound", 0)
    start_fit = Constrained(solution.estimates.copy(), solution.rss, 0.0, follow, True, 0)
    inside = _Point(est, 0.0, 0.0, 1.0 / se, start_fit)
    target = sign * crit
    b = est + sign * crit * se
    refits = 0
    outside = None
    while outside is None:
        if sign * (b - bound) >= 0:
            b = float(bound)
        if abs(b - est) > max_se * se:
            return _Side(np.nan, "unbounded", f"{side}: the profile stays below the critical "
                         f"value out to {max_se:g} standard errors", refits)
        point = _evaluate(solution, j, b, inside, sign, scale)
        refits += 1
        if point is None or not point.fit.converged:
            if abs(b - inside.b) <= xtol * se or refits >= MAX_REFITS_PER_SIDE:
                return _Side(np.nan, "unbounded", f"{side}: the model is not finite (or the "
                             f"refit fails) beyond {inside.b:.6g}", refits)
            b = 0.5 * (inside.b + b)
            continue
        if point.delta < -1e-6 * (crit * scale) ** 2:
            return _Side(np.nan, "not_computed", f"{side}: a lower sum of squares exists at "
                         f"{b:.6g}; the estimates are not at the minimum", refits)
        if abs(point.tau) >= crit:
            outside = point
            break
        if b == bound:
            return _Side(float(bound), "bound", f"{side}: the profile stays below the critical "
                         f"value up to the bound {bound:.6g} you set, so the limit is the bound",
                         refits)
        if refits >= MAX_REFITS_PER_SIDE:
            return _Side(np.nan, "not_computed", f"{side}: search budget exhausted", refits)
        inside = point
        step = (target - point.tau) / point.dtau if point.dtau > 0 else np.inf
        step = sign * min(max(abs(step), MIN_STEP_SE * se), MAX_STEP_SE * se)
        b = point.b + step
    found = _refine(solution, j, sign, scale, inside, outside, target, se * xtol, refits)
    return found._replace(reason=f"{side}: {found.reason}") if found.reason else found


def _refine(solution, j, sign, scale, inside: _Point, outside: _Point, target, xtol,
            refits) -> _Side:
    """Safeguarded Newton on ``tau(b) = target`` inside the bracket ``[inside, outside]``.

    Stops when the error left after the latest Newton correction, estimated
    from the curvature of ``tau`` between the last two points
    (``|tau''| newton^2 / (2 tau')``), or the bracket width is below ``xtol``;
    the corrected value is returned without another refit.
    """
    best, other = (outside, inside) if abs(outside.tau - target) < abs(inside.tau - target) \
        else (inside, outside)
    while True:
        lo, hi = sorted((inside.b, outside.b))
        newton = (target - best.tau) / best.dtau if best.dtau > 0 else np.nan
        curvature = abs((best.dtau - other.dtau) / (best.b - other.b)) \
            if np.isfinite(other.dtau) and best.b != other.b else np.inf
        if abs(newton) <= xtol or 0.5 * curvature * newton ** 2 / best.dtau <= xtol:
            return _Side(float(best.b + newton), "found", "", refits)
        if hi - lo <= xtol:
            return _Side(float(0.5 * (lo + hi)), "found", "", refits)
        if refits >= MAX_REFITS_PER_SIDE:
            return _Side(np.nan, "not_computed", "root search budget exhausted", refits)
        b = best.b + newton
        if not lo < b < hi:
            b = 0.5 * (lo + hi)
        point = _evaluate(solution, j, b, best, sign, scale)
        refits += 1
        if point is None or not point.fit.converged:
            return _Side(np.nan, "not_computed", f"the refit at {b:.6g} failed", refits)
        if abs(point.tau) >= abs(target):
            outside = point
        else:
            inside = point
        best, other = point, best
