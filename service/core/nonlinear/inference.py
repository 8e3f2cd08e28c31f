"""Tangent-plane inference at the least-squares estimates (:func:`infer`).

Conventions (the same as the polynomial family's, so families compare):

* Weights are inverse variances. In the ``"relative"`` mode (default) they
  are known up to a common factor, estimated as ``sigma^2 = RSS / (n - p)``;
  covariance ``sigma^2 (J'WJ)^-1``; tests and limits on Student t with
  ``n - p`` df. In the ``"known_sd"`` mode they are ``1 / SD^2`` of a known
  measurement error: covariance ``(J'WJ)^-1`` (not rescaled), normal
  quantiles, and a chi-square goodness-of-fit test ``RSS_w ~ chi2(n - p)``.
* ``(J'WJ)^-1`` comes from the SVD of the column-scaled ``sqrt(W) J``
  (:mod:`~service.core.nonlinear.tangent`); when that is rank deficient the
  covariance and standard errors are NaN and a notice says so.
* Log-likelihood: relative mode, the Gaussian one at the ML variance RSS/n
  plus ``0.5 * sum(log w)`` (as ``service.core.summary``); known-SD mode, the
  Gaussian one with the known variances ``1/w``:
  ``-0.5 (n log 2 pi - sum(log w) + RSS_w)``. AIC = -2 llf + 2k, BIC = -2 llf
  + k log n, AICc = AIC + 2k(k+1)/(n-k-1), with k = number of parameters (the
  error variance not counted, as in the polynomial family).
* R^2 = 1 - RSS/TSS with TSS about the weighted mean. For nonlinear models
  R^2 is not a reliable measure of fit or a basis for choosing models
  (Spiess & Neumeyer 2010, BMC Pharmacology 10:6); it is reported for
  orientation only.
* Leverages are the diagonal of the hat matrix of ``sqrt(W) J`` (the
  tangent-plane approximation: exact only for a model linear in its parameters).
"""

from __future__ import annotations

import math

import numpy as np
from scipy import special

from service.core.errors import SpecError
from service.core.nonlinear.results import (
    GoodnessOfFit,
    Inference,
    Notice,
    ParameterEstimate,
    Solution,
    frozen,
)
from service.core.nonlinear.tangent import leverages, tangent, unscaled_covariance

WEIGHT_MODES = ("relative", "known_sd")
LOG_2PI = math.log(2 * math.pi)


def check_options(weight_mode: str, level: float) -> None:
    """Raise :class:`SpecError` for an unknown weight mode or a level outside (0, 1)."""
    if weight_mode not in WEIGHT_MODES:
        raise SpecError(f"unknown weight mode {weight_mode!r}", field="options.weight_mode",
                        fix="use 'relative' or 'known_sd'")
    if not 0 < level < 1:
        raise SpecError(f"the confidence level must lie between 0 and 1 (got {level})",
                        field="options.level", fix="use e.g. 0.95")


def critical_value(weight_mode: str, df: int, level: float) -> float:
    """Two-sided quantile: ``t_df(1 - alpha/2)`` (relative) or ``z(1 - alpha/2)`` (known SD)."""
    tail = 0.5 * (1.0 - level)  # the upper tail, taken by symmetry: exact for levels near 1
    if weight_mode == "known_sd":
        return float(-special.ndtri(tail))
    return float(-special.stdtrit(df, tail)) if df > 0 else np.nan


def covariance_scale(solution: Solution, weight_mode: str) -> tuple[float, float]:
    """``(sigma, factor)``: residual SD ``sqrt(RSS/df)`` and the factor on ``(J'WJ)^-1``."""
    df = solution.problem.n - solution.problem.p
    sigma = math.sqrt(solution.rss / df) if df > 0 and np.isfinite(solution.rss) else np.nan
    return sigma, (1.0 if weight_mode == "known_sd" else sigma * sigma)


@np.errstate(all="ignore")  # floating-point trouble is data here, never a warning
def infer(solution: Solution, *, weight_mode: str = "relative", level: float = 0.95,
          alpha: float = 0.05) -> Inference:
    """Standard errors, tests, Wald limits and whole-fit measures of a :class:`Solution`.

    Parameters
    ----------
    solution : Solution
        From :func:`~service.core.nonlinear.solver.solve`.
    weight_mode : {"relative", "known_sd"}
        How to read the weights (see the module docstring).
    level : float
        Confidence level of the Wald limits.
    alpha : float
        Level of the chi-square goodness-of-fit test (known-SD mode).

    Returns
    -------
    Inference
        Parameter rows, covariance and correlation, whole-fit measures and
        notices (rank deficiency, non-convergence, no residual df).

    Raises
    ------
    SpecError
        Unknown ``weight_mode`` or ``level`` outside (0, 1).
    """
    check_options(weight_mode, level)
    problem = solution.problem
    n, p = problem.n, problem.p
    df = n - p
    notices: list[Notice] = []
    jw = problem.sqrt_weights[:, None] * solution.jacobian
    finite = bool(np.isfinite(jw).all())
    if finite:
        tp = tangent(jw)
        cov_u, lev, rank, cond = unscaled_covariance(tp), leverages(tp), tp.rank, tp.condition
    else:
        cov_u, lev, rank, cond = np.full((p, p), np.nan), np.full(n, np.nan), 0, np.inf
        notices.append(Notice("non_finite_jacobian", "the Jacobian is not finite at the "
                                                     "estimates; no standard errors"))
    if finite and rank < p:
        notices.append(Notice("jacobian_rank_deficient", (
            f"the Jacobian has rank {rank} of {p}: standard errors, tests and limits are not "
            "available because the parameters are not separately determined")))
    if not solution.converged:
        notices.append(Notice("not_converged", "the solver did not converge "
                              f"({solution.termination}); these numbers describe the point "
                              "where it stopped"))
    if df == 0:
        notices.append(Notice("no_residual_df", "as many parameters as points: no residual "
                                                "degrees of freedom, no error estimate"))
    sigma, factor = covariance_scale(solution, weight_mode)
    cov = factor * cov_u
    with np.errstate(all="ignore"):
        se = np.sqrt(np.diag(cov))
        est = solution.estimates
        stat = est / se
        if weight_mode == "known_sd":
            pval = 2.0 * special.ndtr(-np.abs(stat))
        else:
            pval = 2.0 * special.stdtr(df, -np.abs(stat)) if df > 0 else np.full(p, np.nan)
        corr = cov / np.outer(se, se)
    crit = critical_value(weight_mode, df, level)
    rows = tuple(ParameterEstimate(name, float(b), float(s), float(z), float(pv),
                                   float(b - crit * s), float(b + crit * s))
                 for name, b, s, z, pv in zip(problem.parameter_names, est, se, stat, pval,
                                              strict=True))
    fit = _whole_fit(solution, weight_mode, alpha)
    cov.setflags(write=False)
    corr.setflags(write=False)
    return Inference(
        parameters=rows, covariance=cov, correlation=corr, weight_mode=weight_mode,
        distribution="normal" if weight_mode == "known_sd" else "t", level=level,
        critical_value=crit, n=n, n_parameters=p, df_residual=df, rss=solution.rss,
        sigma=sigma, covariance_scale=factor, tss=fit["tss"], r_squared=fit["r_squared"],
        log_likelihood=fit["llf"], aic=fit["aic"], aicc=fit["aicc"], bic=fit["bic"],
        leverage=frozen(lev), rank=rank, condition_number=cond,
        goodness_of_fit=fit["gof"], notices=tuple(notices))


def _whole_fit(solution: Solution, weight_mode: str, alpha: float) -> dict:
    problem = solution.problem
    n, k = problem.n, problem.p
    w, y, rss = problem.weights, problem.y, solution.rss
    ybar = float(w @ y / w.sum())
    tss = float(w @ (y - ybar) ** 2)
    sum_log_w = float(np.log(w).sum())
    with np.errstate(all="ignore"):
        r2 = 1.0 - rss / tss if tss > 0 else np.nan
        if weight_mode == "known_sd":
            llf = -0.5 * (n * LOG_2PI - sum_log_w + rss)
        elif rss > 0:
            llf = -0.5 * n * (LOG_2PI + math.log(rss / n) + 1.0) + 0.5 * sum_log_w
        else:
            llf = np.nan
    aic = -2.0 * llf + 2.0 * k
    bic = -2.0 * llf + k * math.log(n)
    aicc = aic + 2.0 * k * (k + 1) / (n - k - 1) if n - k - 1 > 0 else np.nan
    gof = None
    if weight_mode == "known_sd" and n > k:
        p_value = float(special.chdtrc(n - k, rss))
        gof = GoodnessOfFit(float(rss), n - k, p_value, alpha, p_value < alpha)
    return {"tss": tss, "r_squared": float(r2), "llf": float(llf), "aic": float(aic),
            "aicc": float(aicc), "bic": float(bic), "gof": gof}
