"""The analysis every nonlinear family shares: from a model and start values to the report.

Solve (:mod:`~service.core.nonlinear.solver`), tangent-plane inference and
profile-likelihood limits, predictions with bands on the grid, the shared
residual diagnostics (:mod:`service.core.checks`; Breusch-Pagan against x),
the chi-square goodness-of-fit test with known SDs, and the trust flags.
A family supplies the model, its parameter names and start values.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np
from scipy import special

from service.core.checks.diagnostics import residual_diagnostics
from service.core.checks.exact_fit import without_intervals
from service.core.checks.flags import TEST_ALPHA, trust_flags
from service.core.checks.known_sd import (
    KNOWN_SD,
    chi_square_fit,
    normal_quantile,
    require_weights,
    simultaneous_normal_factor,
)
from service.core.checks.lack_of_fit import distinct_count
from service.core.checks.quantiles import f_quantile
from service.core.data.grid import fit_grid
from service.core.data.inputs import clean_data
from service.core.data.reading_weights import reading_weights
from service.core.errors import DesignError, SpecError
from service.core.nonlinear.bands import band_values
from service.core.nonlinear.flags import nonlinear_flags
from service.core.nonlinear.inference import infer
from service.core.nonlinear.profile import profile_limits
from service.core.nonlinear.report import FitInfo, FittedCurve, NonlinearReport, ParameterRow
from service.core.nonlinear.solver import solve
from service.core.results import FitStatistics, Notice, Prediction, TestResult
from service.core.spec import FitOptions

NAN = float("nan")
EXACT_RTOL = 1e-13     # an RSS below (1e-13)² of the weighted sum of y² is rounding noise
GOF_ALPHA = TEST_ALPHA  # the chi-square goodness-of-fit test (known SDs): a flag test's level


def analyse(equation, names: tuple[str, ...], family: str, expression: str, x, y, weights,
            start, *, lower=None, upper=None, options: FitOptions,
            started_from: str = "given") -> NonlinearReport:
    """The whole analysis of one series for any nonlinear family.

    Parameters
    ----------
    equation : object
        The model: ``values_and_jacobian(x, theta)`` with exact derivatives.
    names : tuple of str
        Parameter names, in the order of ``start``.
    family, expression : str
        The family's name and the equation's canonical text (for the report).
    x, y, weights : array_like
        The caller's series (cleaned here with ``options.missing``).
    start : array_like
        Start values; ``lower``/``upper`` optional bounds (arrays, +-inf for none).
    options : FitOptions
        Level, weighting, grid and missing-value policy.
    started_from : str
        How ``start`` was chosen, for ``fit_info``.

    Raises
    ------
    DataError, DesignError, SpecError
        Each names the offending field and how to fix it.
    """
    require_weights(options.weighting, weights)
    with np.errstate(all="ignore"):
        data = clean_data(x, y, weights, options.missing)
        n, p = data.x.size, len(names)
        if n < p:
            raise DesignError(f"{n} points cannot determine {p} parameters.", field="x",
                              fix=f"Send at least {p} points (5 per parameter is common "
                                  "practice).")
        start = np.asarray(start, dtype=float)
        solution = solve(equation, data.x, data.y, start, weights=data.w, lower=lower,
                         upper=upper)
        return report(solution, data, equation, names, family, expression, start,
                      options=options, started_from=started_from)


def report(solution, data, equation, names: tuple[str, ...], family: str, expression: str,
           start, *, options: FitOptions, started_from: str = "given",
           start_strategy: str = "given", starts_tried: int = 1,
           log_x: bool = False) -> NonlinearReport:
    """The report of a solved fit (what :func:`analyse` does after :func:`solve`).

    For families that choose among several solved starts themselves: ``solution``
    is the kept :class:`Solution` of ``data`` (a cleaned series,
    :func:`service.core.data.inputs.clean_data`), ``start`` the start it came from,
    ``start_strategy`` its name and ``starts_tried`` how many starts were solved.
    ``log_x``: the curve is on log x (a built-in family's log scale), so its grid is
    log-spaced unless the caller chose (:func:`service.core.data.grid.grid_points`).
    """
    n, p = data.x.size, len(names)
    mode, level = options.weighting, float(options.level)
    inference = infer(solution, weight_mode=mode, level=level, alpha=GOF_ALPHA)
    profile = profile_limits(solution, level=level, weight_mode=mode)
    rows = tuple(ParameterRow(r.name, r.estimate, r.std_error, r.statistic, r.p_value, r.lower,
                              r.upper, pl.lower, pl.upper, pl.lower_status, pl.upper_status)
                 for r, pl in zip(inference.parameters, profile.limits, strict=True))
    x_lo, x_hi = float(data.x.min()), float(data.x.max())
    sqrt_w = None if data.w is None else np.sqrt(data.w)
    zw = data.y if sqrt_w is None else sqrt_w * data.y
    exact = solution.rss <= (EXACT_RTOL ** 2) * float(zw @ zw)
    # an exact fit stores sigma 0, as the polynomial does: no noise estimate, so no bands
    # (checks.exact_fit); known SDs keep theirs (the noise is known), and with no residual
    # df sigma stays undefined
    sigma, noise = ((0.0, 0.0) if exact and mode != KNOWN_SD and inference.df_residual > 0
                    else (inference.sigma, inference.covariance_scale))
    fitted = FittedCurve(family, expression, names, solution.estimates,
                         inference.covariance, sigma, noise,
                         inference.df_residual, n, x_lo, x_hi, data.w is not None, mode,
                         inference.distribution, level, equation)
    grid = None
    if options.grid is not None:
        grid = predict(fitted, fit_grid(options, data.x, log_x))
    distinct = data.distinct if data.distinct is not None else distinct_count(data.x)
    diagnostics = residual_diagnostics(
        data.index, data.x, np.array(solution.weighted_residuals), inference.leverage, zw,
        sqrt_w, p, solution.rss, exact, distinct, data.x[:, None], "x",
        basis=_tangent_basis(solution, inference))
    gof = _goodness_of_fit(inference)
    if gof is not None:
        diagnostics = replace(diagnostics, tests=diagnostics.tests + (gof,))
    info = _fit_info(solution, np.asarray(start, dtype=float), started_from, start_strategy,
                     starts_tried)
    flags = nonlinear_flags(info, rows, inference.correlation, gof, GOF_ALPHA)
    flags.extend(trust_flags(n=n, p=p, exact=exact, condition=NAN, diagnostics=diagnostics,
                             grid=grid))
    notices = _notices(solution.notices, inference.notices, profile.notices,
                       () if grid is None else grid.notices)
    return NonlinearReport(fitted, data.n_input, tuple(data.dropped), rows,
                           inference.correlation, _statistics(inference, n, p), info,
                           diagnostics, grid, tuple(flags), notices)


def predict(fitted: FittedCurve, x, *, level: float | None = None, m: int = 1,
            weights=None) -> Prediction:
    """Fitted values with mean, new-observation and simultaneous bands at ``x``.

    The delta method (tangent plane) around the estimates; the simultaneous band
    uses ``sqrt(p F(p, df))`` (``sqrt(chi²_p)`` with known SDs) in place of the
    pointwise critical value. ``weights`` (one per x, default 1) is the weight of a new
    observation there: the observation band is for the mean of ``m`` readings of variance
    ``noise_variance / weight`` (:mod:`service.core.data.reading_weights`).
    """
    level = fitted.level if level is None else float(level)
    if not 0.0 < level < 1.0:
        raise SpecError(f"level = {level!r} is not between 0 and 1.", field="level",
                        fix="Use a confidence level such as 0.95.")
    xs = np.array(x, dtype=float).reshape(-1)
    w = reading_weights(weights, xs.size)
    p, df = len(fitted.parameter_names), fitted.df_residual
    if fitted.distribution == "normal":
        crit, wide = normal_quantile(level), simultaneous_normal_factor(p, level)
    else:
        crit = float(-special.stdtrit(df, 0.5 * (1.0 - level))) if df > 0 else NAN
        wide = float(np.sqrt(p * f_quantile(p, df, level))) if df > 0 else NAN
    with np.errstate(all="ignore"):
        bands = band_values(fitted.model, xs, fitted.estimates, fitted.covariance,
                            fitted.noise_variance, crit, level, int(m),
                            np.array([fitted.x_min, fitted.x_max]), w)
        spread = wide * bands.se_fit
    return without_intervals(fitted, Prediction(
        bands.x, bands.fit, bands.se_fit, bands.mean_lower, bands.mean_upper, bands.obs_lower,
        bands.obs_upper, _frozen(bands.fit - spread), _frozen(bands.fit + spread),
        bands.extrapolated, level, notices=tuple(Notice(n.code, n.message)
                                                 for n in bands.notices)))


def _frozen(values: np.ndarray) -> np.ndarray:
    values.setflags(write=False)
    return values


def _tangent_basis(solution, inference) -> np.ndarray | None:
    """Orthonormal basis of the weighted Jacobian at the solution (the tangent plane), for
    the Durbin-Watson moments; None when it is not of full rank."""
    jw = solution.problem.sqrt_weights[:, None] * solution.jacobian
    if inference.rank < jw.shape[1] or not np.isfinite(jw).all():
        return None
    return np.linalg.qr(jw)[0]


def _goodness_of_fit(inference) -> TestResult | None:
    gof = inference.goodness_of_fit
    return None if gof is None else chi_square_fit(gof.statistic, gof.df)


def _fit_info(solution, start: np.ndarray, started_from: str, start_strategy: str,
              starts_tried: int) -> FitInfo:
    last = solution.attempts[-1] if solution.attempts else None
    method = "none" if last is None else f"{last.method} ({last.x_scale} scaling)"
    return FitInfo(started_from, tuple(start.tolist()), method, solution.iterations, solution.nfev,
                   solution.njev, solution.termination, solution.message, solution.converged,
                   solution.relative_offset, solution.gradient_norm, solution.bound_status,
                   solution.rank, solution.condition_number, start_strategy, starts_tried)


def _statistics(inf, n: int, p: int) -> FitStatistics:
    df = inf.df_residual
    adj = 1.0 - (1.0 - inf.r_squared) * (n - 1) / df if df > 0 else NAN
    return FitStatistics(n, p, p - 1, df, inf.rss, inf.tss, True, inf.r_squared, adj,
                         inf.sigma, NAN, NAN, inf.log_likelihood, inf.aic, inf.aicc, inf.bic,
                         NAN, NAN, inf.condition_number)


def _notices(*groups) -> tuple[Notice, ...]:
    seen, out = set(), []
    for group in groups:
        for notice in group:
            if notice.code not in seen:
                seen.add(notice.code)
                out.append(Notice(notice.code, notice.message))
    return tuple(out)
