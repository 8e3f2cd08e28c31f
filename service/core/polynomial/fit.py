"""The fit of one series: validation, QR, selection, tables, bands and diagnostics.

Weights are **inverse variances**: ``w_i = 1 / var(y_i)`` up to one common
factor (``sigma²`` estimates that factor). A point measured twice as
precisely (half the standard deviation) gets four times the weight.
"""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np

from service.core.checks.flags import TEST_ALPHA, trust_flags
from service.core.checks.known_sd import (
    KNOWN_SD,
    chi_square_fit,
    chi_square_flag,
    require_weights,
)
from service.core.checks.lack_of_fit import distinct_count
from service.core.checks.shapiro import MAX_N as SHAPIRO_MAX_N
from service.core.data import transforms
from service.core.data.grid import check_domain, grid_points
from service.core.data.inputs import check_magnitude, clean_data
from service.core.errors import DesignError
from service.core.interrupt import checkpoint
from service.core.polynomial import design, qr
from service.core.polynomial.bands import grid_prediction
from service.core.polynomial.compiled import qr as kernels_qr
from service.core.polynomial.compiled import raw as kernels_raw
from service.core.polynomial.decomposition import decompose
from service.core.polynomial.diagnostics import diagnose
from service.core.polynomial.selection import candidate_row, choose
from service.core.polynomial.spec_check import check_spec
from service.core.polynomial.summary import candidate_measures, with_known_variance
from service.core.polynomial.tables import fit_tables
from service.core.results import (
    FitReport,
    FitStatistics,
    FittedPolynomial,
    Notice,
    Selection,
    frozen_array,
)
from service.core.spec import FitOptions, ModelSpec

NAN = float("nan")
RAW_COND_NOTICE = 1e10  # raw-power design condition number worth a notice (common practice)
EPS = float(np.finfo(float).eps)
FLOAT64_TOL = 1e-12  # estimated relative error above which the fit repeats in longdouble


_NO_T = np.empty((0, 0))
_NO_T.setflags(write=False)  # read-only like the cached conversion matrices (one signature)
_DEFAULT_MODEL = ModelSpec()
_DEFAULT_OPTIONS = FitOptions()


def fit_series(x, y, weights=None, *, model: ModelSpec = _DEFAULT_MODEL,
               options: FitOptions = _DEFAULT_OPTIONS) -> FitReport:
    """Fit a polynomial to one series and analyse it.

    Parameters
    ----------
    x, y : array_like
        Paired values; null/NaN marks a missing value (see ``options.missing``).
    weights : array_like, optional
        Inverse variances (``1/sd²``), strictly positive; None for equal weights.
    model : ModelSpec
        Fixed ``degree``, or ``max_degree`` with a ``select`` method.
    options : FitOptions
        Level, missing-value policy, grid, sections to compute.

    Returns
    -------
    FitReport
        Frozen. ``diagnostics``/``grid`` are None when not in ``options.include``
        (or when ``options.grid`` is None); the diagnostics are computed either way,
        since the trust flags rest on them.

    Raises
    ------
    DataError, TransformError, DesignError, SpecError
        Each names the offending field and how to fix it.

    Notes
    -----
    Floating-point exceptions never escape as warnings: undefined numbers
    are NaN and numerical trouble is reported as a ``Notice`` or flag.
    """
    with np.errstate(all="ignore"):
        return _fit(x, y, weights, model, options)


def _fit(x, y, weights, model: ModelSpec, options: FitOptions) -> FitReport:
    dmin, dmax, selects = check_spec(model, options)
    require_weights(options.weighting, weights)
    known = options.weighting == KNOWN_SD
    data = clean_data(x, y, weights, options.missing)
    intercept = model.intercept
    u = transforms.apply(model.transform_x, data.x, field="x", index=data.index)
    z = transforms.apply(model.transform_y, data.y, field="y", index=data.index)
    u_bounds = check_magnitude(u, "x", data.index, _after(model.transform_x),
                               data.x_bounds if model.transform_x == "none" else None)
    check_magnitude(z, "y", data.index, _after(model.transform_y),
                    data.y_bounds if model.transform_y == "none" else None)
    if data.w is not None:
        check_magnitude(data.w, "weights", data.index, "")
    notices: list[Notice] = []
    distinct = data.distinct if data.distinct is not None else distinct_count(data.x)
    dmax = _supported_max(distinct, intercept, dmin, dmax, selects, notices, n=data.x.size)
    n = u.size
    sum_log_w = 0.0 if data.w is None else float(np.sum(np.log(data.w)))
    degrees = list(range(dmin, dmax + 1))
    field = "model.max_degree" if selects else "model.degree"
    dec, cands, degree, reason, method = _select(u, z, data.w, degrees, model, selects,
                                                 sum_log_w, field, u_bounds, False, known)
    checkpoint()  # a caller's budget is checked between the phases of a fit
    m = cands[degree - dmin]
    sigma2 = 1.0 if known else _residual_mean_square(m)
    readout = _float64_readout(dec, m, degree, sigma2)
    if (readout is None and not dec.extended and n <= qr.EXTENDED_MAX_ROWS
            and qr.EXTENDED_IS_WIDER):
        dec, cands, degree, reason, method = _select(u, z, data.w, degrees, model, selects,
                                                     sum_log_w, field, u_bounds, True, known)
        m = cands[degree - dmin]
        sigma2 = 1.0 if known else _residual_mean_square(m)
    p = m.p
    selection = Selection(method, degree, reason, float(model.alpha),
                          tuple(candidate_row(c) for c in cands))
    if readout is not None:
        coef_b, r64, raw, cov, lost, cond, raw_cond = readout
    else:  # extended digits into the conversion (it cancels on narrow, off-centre x)
        rinv = dec.r_inv[:p, :p]
        coef_b = rinv @ dec.effects[:p]
        raw, cov, lost = design.raw_coefficients(dec.shift, dec.scale, degree, intercept,
                                                 coef_b, (rinv @ rinv.T) * np.longdouble(sigma2))
        r64 = np.ascontiguousarray(dec.r[:p, :p], dtype=float)
        cond, raw_cond = _conditions(r64, dec.shift, dec.scale, degree, intercept)
    sigma = 0.0 if m.exact else m.sigma  # the estimate (about 1 with known SDs)
    terms = design.term_names(degree, intercept)
    if lost:
        notices.append(Notice("raw_coefficients_overflow",
                              "Some raw-power coefficients or their covariances do not fit in "
                              "double precision (x range tiny or huge for this degree); they are "
                              "reported as null. Predictions use the scaled basis and are fine."))
    if raw_cond > RAW_COND_NOTICE:
        notices.append(Notice("raw_coefficients_sensitive",
                              f"The raw-power design has condition number {raw_cond:.3g}: the "
                              "raw coefficients are very sensitive to rounding and to the data. "
                              "Predict with the fitted model (it works on the scaled basis)."))
    if m.df_residual > 0 and math.isnan(m.press) and "selection" in options.include:
        notices.append(Notice("press_undefined",
                              "At least one point has leverage 1 (the curve must pass through "
                              "it), so PRESS and predicted R² are undefined (null)."))
    if n > SHAPIRO_MAX_N and "diagnostics" in options.include:
        notices.append(Notice("normality_test_skipped",
                              f"Shapiro-Wilk was not computed: it is defined for at most "
                              f"{SHAPIRO_MAX_N} points (this series has {n})."))
    if not qr.EXTENDED_IS_WIDER or n > qr.EXTENDED_MAX_ROWS:
        notices.append(Notice("float64_only",
                              "This fit ran in float64 only (long series, or no extended "
                              "precision on this platform): raw-power coefficients of high "
                              "degree may carry a few digits fewer."))
    if model.transform_y != "none":
        notices.append(Notice("retransformation_bias",
                              f"y was fitted on the {model.transform_y} scale; predictions are "
                              "back-transformed naively, which estimates the median rather than "
                              "the mean of y (retransformation bias)."))
    if model.transform_x == "none":
        xmin, xmax = u_bounds
    else:
        xmin, xmax = float(data.x.min()), float(data.x.max())
    fitted = FittedPolynomial(
        degree, intercept, model.transform_x, model.transform_y, terms, dec.shift, dec.scale,
        frozen_array(np.asarray(coef_b, dtype=float)), frozen_array(r64), frozen_array(raw),
        frozen_array(cov), 1.0 if known else float(sigma), m.df_residual, n, xmin, xmax,
        data.w is not None, float(options.level), options.weighting)
    coefficients, anova = fit_tables(terms, raw, cov, dec.effects, degree, intercept, m.rss,
                                     m.df_residual, options.level, known)
    statistics = FitStatistics(
        n, p, m.df_model, m.df_residual, m.rss, m.tss, intercept, m.r_squared, m.adj_r_squared,
        float(sigma), m.f, m.f_p_value, m.log_likelihood, m.aic, m.aicc, m.bic, m.press,
        m.press_r_squared, cond)
    checkpoint()
    # always diagnosed: the trust flags rest on these tests, whatever include returns
    diagnostics = diagnose(data.index, data.x, dec, degree, m.rss, m.exact, distinct)
    chi_square = chi_square_fit(m.rss, m.df_residual) if known else None
    if chi_square is not None:
        diagnostics = replace(diagnostics, tests=diagnostics.tests + (chi_square,))
    grid = None
    checkpoint()
    if "grid" in options.include and options.grid is not None:
        gx = grid_points(options.grid, xmin, xmax, options.max_grid_points)
        check_domain(options.grid, gx, model.transform_x)
        grid = grid_prediction(fitted, gx)
        notices = (*notices, *grid.notices)  # no_residual_variance: bands withheld
    flags = trust_flags(n=n, p=p, exact=m.exact, condition=cond, diagnostics=diagnostics,
                        grid=grid)
    failed = chi_square_flag(chi_square, TEST_ALPHA)
    if failed is not None:
        flags = (failed, *flags)
    if "diagnostics" not in options.include:
        diagnostics = None
    return FitReport(fitted, data.n_input, data.dropped, coefficients, anova, statistics,
                     selection, diagnostics, grid, flags, tuple(notices))


def _select(u, z, w, degrees, model: ModelSpec, selects: bool, sum_log_w: float, field: str,
            bounds, extended: bool, known: bool):
    """Factor the design, measure every candidate and choose the degree."""
    dec = decompose(u, z, w, degrees, model.intercept, field, bounds, extended)
    cands = candidate_measures(dec, degrees, sum_log_w)
    if known:  # criteria from the likelihood at the known variances
        cands = with_known_variance(cands, sum_log_w)
    if selects:
        degree, reason = choose(model.select, cands, model.alpha)
        return dec, cands, degree, reason, model.select
    dmin = degrees[0]
    return dec, cands, dmin, f"Degree {dmin} was fixed by the caller.", "fixed"


def _residual_mean_square(m) -> float:
    """RSS / df of a candidate: 0 for an exact fit, NaN without residual df."""
    return 0.0 if m.exact else (m.rss / m.df_residual if m.df_residual > 0 else NAN)


def _float64_readout(dec, m, degree, sigma2):
    """The chosen fit's float64 numbers (``kernels_raw.float64_readout``), or None when a
    float64 factorization could lose more than :data:`FLOAT64_TOL` of them.

    Estimated relative errors (float64 ulps times an amplification): the
    residual SS loses ``||zw|| / ||e||`` (R² near 1); the coefficients the
    condition number of R times what the conversion to raw powers cancels
    (``kernels_qr.float64_loss``). An exact fit, a fit without residual df
    and an extended factorization answer None (the caller converts in
    extended precision).
    """
    if dec.extended or m.exact or m.df_residual <= 0 or not m.rss > 0:
        return None
    if EPS * math.sqrt(dec.sum_zw2 / m.rss) > FLOAT64_TOL:
        return None
    tm = design.conversion_float(dec.shift, dec.scale, degree, dec.intercept)
    if tm is None:
        return None
    # C order for every path (the Gram passes give Fortran order): one compiled signature
    r, r_inv = np.ascontiguousarray(dec.r), np.ascontiguousarray(dec.r_inv)
    ok, *numbers = kernels_raw.float64_readout(r, r_inv, dec.effects, m.p, tm, sigma2,
                                               FLOAT64_TOL)
    return numbers if ok else None


def _after(transform: str) -> str:
    return "" if transform == "none" else f"after the {transform} transform"


def _supported_max(distinct, intercept, dmin, dmax, selects, notices, *, n: int) -> int:
    """Largest degree the distinct x values support; error or notice when it binds.

    Data at a single x value support no curve at all: when the degree is being selected
    (the caller did not ask for one) or there is a single point, that is said of the data
    (field ``x``), not of ``model.min_degree``; a degree the caller fixed is named as such.
    """
    cap = distinct - (1 if intercept else 0)
    if dmin > cap or (not selects and dmax > cap):
        need = dmin + (1 if intercept else 0)
        if distinct <= 1 and dmin >= 1 and (selects or n == 1):
            what = "a single data point" if n == 1 else f"{n} points, all at the same x"
            raise DesignError(
                f"Too few data to fit a curve: {what}; a degree-{dmin} curve needs points at "
                f"{need} or more distinct x values.", field="x",
                fix=f"Send points at {need} or more distinct x values (more to judge the "
                    "fit).")
        raise DesignError(
            f"Degree {dmin} needs at least {need} distinct x values; the data have {distinct}.",
            field="model.degree" if not selects else "model.min_degree",
            fix=f"Use a degree of at most {max(cap, 0)}, or add points at new x values.")
    if dmax > cap:
        notices.append(Notice("max_degree_reduced",
                              f"max_degree lowered from {dmax} to {cap}: the data have only "
                              f"{distinct} distinct x values."))
        return cap
    return dmax


def _conditions(r, shift, scale, degree, intercept) -> tuple[float, float]:
    """Condition numbers of the scaled-basis design and of the raw-power design
    (``kernels_qr.conditions``)."""
    tm = design.conversion_float(shift, scale, degree, intercept)
    basis, raw = kernels_qr.conditions(r, _NO_T if tm is None else tm)
    return float(basis), float(raw)
