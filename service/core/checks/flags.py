"""Trust flags: plain-language reasons to be careful with a fit, with their evidence.

Severity says what a flag is worth to a pipeline that triages on it:

* ``serious`` / ``caution`` flags are either **facts** about the data, the design
  or the request, true or false with certainty (no error rate): ``exact_fit``,
  ``no_residual_df``, ``ill_conditioned_design`` (condition number of the scaled
  basis above 1e6, serious above 1e10: common practice) and ``extrapolation``;
  or **decisions** of a formal test at a stated level. The tests, each at the
  per-test level ``TEST_ALPHA = FAMILY_ALPHA / 5 = 0.01``:

  - ``outliers``: Bonferroni-corrected externally studentized residual test
    (largest ``|t_i|`` against ``t_{n-p-1}(1 - alpha / (2n))``; Cook & Weisberg 1982);
  - ``lack_of_fit`` (serious): F test of the lack-of-fit against pure error, when
    x repeats (Draper & Smith 1998);
  - ``non_normal_residuals``: Shapiro-Wilk, Royston's p-value (AS R94);
  - ``non_constant_variance``: Breusch-Pagan in Koenker's studentized form;
  - ``serial_correlation``: Durbin-Watson, **one-sided** (positive serial
    correlation in the given order) p-value from the design's moments of d
    (:mod:`service.core.checks.durbin_watson`).

  Family-wise rule: Bonferroni across these five tests. Under a correct model
  with independent normal errors the chance that a fit gets any test-based
  caution or serious flag is at most ``FAMILY_ALPHA = 0.05`` (Boole's
  inequality; exactly so for the F and Bonferroni-t tests, approximately for
  the three whose p-values are approximations).

* Influence is a caution only when it is also evidence: ``influential_points``
  (Cook's distance above the median of ``F(p, n - p)``, Cook 1977) and
  ``high_leverage`` (``h > 2p/n``, Hoaglin & Welsch 1978) are ``info`` on their
  own: on a clean fit they describe the design (the end points of an evenly
  spaced design always exceed 2p/n; an isolated x has a large Cook's distance
  for most noise draws). Each becomes ``caution`` when one of its points is also
  an outlier by the Bonferroni test above, i.e. a point that both disagrees with
  the rest of the data and moves the curve. Both are then subsets of the
  ``outliers`` decision and add nothing to the family-wise rate.

* ``few_points_per_parameter`` (fewer than 5 points per coefficient, common
  practice) is ``info``: a fact about the design that says the tests above have
  little power, not evidence of a problem.

``benchmarks/bench_flag_calibration.py`` prints the firing rates on clean and
faulty series; ``tests/core/test_flag_calibration.py`` holds them to the levels.
"""

from __future__ import annotations

import numpy as np

from service.core.results import Diagnostics, Prediction, TrustFlag

FAMILY_ALPHA = 0.05        # chance of any test-based caution/serious flag on a clean fit
TESTED = ("lack_of_fit", "non_normal_residuals", "non_constant_variance", "serial_correlation",
          "outliers")
TEST_ALPHA = FAMILY_ALPHA / len(TESTED)   # Bonferroni: 0.01 per test
POINTS_PER_PARAMETER = 5   # fewer points per coefficient than this: info (common practice)
COND_CAUTION = 1e6         # basis condition number: ~6 of 16 digits at risk (common practice)
COND_SERIOUS = 1e10
THRESHOLDS = {"test_alpha": TEST_ALPHA, "family_alpha": FAMILY_ALPHA,
              "points_per_parameter": float(POINTS_PER_PARAMETER),
              "condition_number": COND_CAUTION, "condition_number_serious": COND_SERIOUS}


def trust_flags(*, n: int, p: int, exact: bool, condition: float,
                diagnostics: Diagnostics | None, grid: Prediction | None) -> tuple[TrustFlag, ...]:
    """Collect the flags that apply to this fit (order: most to least severe within kind).

    Parameters
    ----------
    n, p : points used and fitted parameters.
    exact : the fit reproduces every point.
    condition : condition number of the family's (scaled) design; NaN when it has none.
    diagnostics : the shared residual diagnostics
        (:func:`service.core.checks.diagnostics.residual_diagnostics`); None skips
        the data-driven flags.
    grid : the predictions on the caller's grid, or None.
    """
    out: list[TrustFlag] = []
    if exact:
        out.append(TrustFlag("exact_fit", "caution",
                             "The curve passes through every point (zero residual): there is no "
                             "estimate of noise, so uncertainties are zero and F is undefined.",
                             {"n": n, "parameters": p}))
    if n == p:
        out.append(TrustFlag("no_residual_df", "serious",
                             "There are exactly as many points as coefficients: the curve "
                             "interpolates and nothing measures its error.",
                             {"n": n, "parameters": p}))
    elif n < POINTS_PER_PARAMETER * p:
        out.append(TrustFlag("few_points_per_parameter", "info",
                             f"Only {n / p:.1f} points per coefficient: the checks below have "
                             f"little power to find a problem with fewer than about "
                             f"{POINTS_PER_PARAMETER}.",
                             {"n": n, "parameters": p, "threshold": POINTS_PER_PARAMETER}))
    if condition > COND_CAUTION:
        sev = "serious" if condition > COND_SERIOUS else "caution"
        out.append(TrustFlag("ill_conditioned_design", sev,
                             "The design is ill-conditioned even on the scaled x basis: small "
                             "changes in the data can move the coefficients a lot.",
                             {"condition_number": condition, "threshold": COND_CAUTION}))
    if diagnostics is not None:
        out.extend(_from_diagnostics(diagnostics))
    # count_nonzero: a direct C count (``.any()``/``.sum()`` go through numpy's reductions)
    k = 0 if grid is None else int(np.count_nonzero(grid.extrapolated))
    if k:
        out.append(TrustFlag("extrapolation", "caution",
                             f"{k} grid point(s) lie outside the range of the data; the curve "
                             "there is not supported by observations.",
                             {"points": k, "grid_min": float(grid.x.min()),
                              "grid_max": float(grid.x.max())}))
    return tuple(out)


def _test_evidence(statistic: float, p_value: float) -> dict:
    return {"statistic": statistic, "p_value": p_value, "alpha": TEST_ALPHA,
            "family_alpha": FAMILY_ALPHA}


def _from_diagnostics(d: Diagnostics) -> list[TrustFlag]:
    out: list[TrustFlag] = []
    lof = d.lack_of_fit
    if lof is not None and lof.p_value < TEST_ALPHA:
        out.append(TrustFlag("lack_of_fit", "serious",
                             "Replicated x values show the curve misses the level means by more "
                             "than the replicate scatter explains: the model shape is wrong.",
                             {"f": lof.f, "p_value": lof.p_value, "df": (lof.df_lack, lof.df_pure),
                              "alpha": TEST_ALPHA, "family_alpha": FAMILY_ALPHA}))
    tests = {t.name: t for t in d.tests}
    sw, bp, dw = tests.get("shapiro_wilk"), tests.get("breusch_pagan"), tests.get("durbin_watson")
    if sw is not None and sw.p_value < TEST_ALPHA:
        out.append(TrustFlag("non_normal_residuals", "caution",
                             "The residuals do not look normally distributed (Shapiro-Wilk), so "
                             "p-values and bands may be off.",
                             _test_evidence(sw.statistic, sw.p_value)))
    if bp is not None and bp.p_value < TEST_ALPHA:
        out.append(TrustFlag("non_constant_variance", "caution",
                             "The scatter changes along x (Breusch-Pagan); consider weights "
                             "(inverse variances) or a transform of y.",
                             _test_evidence(bp.statistic, bp.p_value)))
    if dw is not None and dw.p_value < TEST_ALPHA:
        out.append(TrustFlag("serial_correlation", "caution",
                             "Neighbouring residuals (in the given order) are positively "
                             "correlated (Durbin-Watson, one-sided), so the uncertainties are "
                             "likely understated, or the curve misses a trend in that order.",
                             {**_test_evidence(dw.statistic, dw.p_value),
                              "alternative": "positive"}))
    if d.outliers:
        out.append(TrustFlag("outliers", "caution",
                             f"{len(d.outliers)} point(s) sit further from the curve than the "
                             "Bonferroni-adjusted studentized-residual limit.",
                             {"indices": d.outliers, "threshold": d.thresholds["outlier_t"],
                              "alpha": TEST_ALPHA, "family_alpha": FAMILY_ALPHA}))
    outlying = set(d.outliers) if d.outliers else ()
    if d.influential:
        both = tuple(i for i in d.influential if i in outlying) if outlying else ()
        if both:
            message = (f"{len(both)} point(s) are outliers that also change the fit strongly "
                       "on their own (Cook's distance); check them.")
        else:
            message = (f"{len(d.influential)} point(s) have a large Cook's distance, but none "
                       "is an outlier: the design leans on them.")
        out.append(TrustFlag("influential_points", "caution" if both else "info", message,
                             {"indices": d.influential, "outlying": both,
                              "threshold": d.thresholds["cooks_distance"]}))
    if d.high_leverage:
        both = ()
        if outlying and d.influential:
            lever = set(d.high_leverage)
            both = tuple(i for i in d.influential if i in outlying and i in lever)
        if both:
            message = (f"{len(both)} high-leverage point(s) are influential outliers: the "
                       "curve leans on points that disagree with the rest.")
        else:
            message = (f"{len(d.high_leverage)} point(s) have high leverage (the fit leans "
                       "on their y: x far from the rest, or where a curve's parameters act "
                       "most); none is an influential outlier.")
        out.append(TrustFlag("high_leverage", "caution" if both else "info", message,
                             {"indices": d.high_leverage, "influential_outliers": both,
                              "threshold": d.thresholds["leverage"]}))
    return out
