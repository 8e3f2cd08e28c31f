"""Trust flags: plain-language reasons to be careful with a fit, with their evidence.

Cut-offs are common practice, not laws; each flag's evidence carries the
number and the cut-off it was compared with.
"""

from __future__ import annotations

import math

from service.core.results import Diagnostics, Prediction, TrustFlag

TEST_ALPHA = 0.05          # formal assumption tests (common practice)
POINTS_PER_PARAMETER = 5   # fewer points per coefficient than this: caution (common practice)
COND_CAUTION = 1e6         # basis condition number: ~6 of 16 digits at risk (common practice)
COND_SERIOUS = 1e10
DW_LOW, DW_HIGH = 1.5, 2.5  # Durbin-Watson rule of thumb (common practice)
THRESHOLDS = {"test_alpha": TEST_ALPHA, "points_per_parameter": float(POINTS_PER_PARAMETER),
              "condition_number": COND_CAUTION, "condition_number_serious": COND_SERIOUS,
              "durbin_watson_low": DW_LOW, "durbin_watson_high": DW_HIGH}


def trust_flags(*, n: int, p: int, exact: bool, condition: float,
                diagnostics: Diagnostics | None, grid: Prediction | None) -> tuple[TrustFlag, ...]:
    """Collect the flags that apply to this fit (order: most to least severe within kind)."""
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
        out.append(TrustFlag("few_points_per_parameter", "caution",
                             f"Only {n / p:.1f} points per coefficient; estimates and tests are "
                             f"fragile below about {POINTS_PER_PARAMETER}.",
                             {"n": n, "parameters": p, "threshold": POINTS_PER_PARAMETER}))
    if condition > COND_CAUTION:
        sev = "serious" if condition > COND_SERIOUS else "caution"
        out.append(TrustFlag("ill_conditioned_design", sev,
                             "The design is ill-conditioned even on the scaled x basis: small "
                             "changes in the data can move the coefficients a lot.",
                             {"condition_number": condition, "threshold": COND_CAUTION}))
    if diagnostics is not None:
        out.extend(_from_diagnostics(diagnostics, n))
    if grid is not None and grid.extrapolated.any():
        k = int(grid.extrapolated.sum())
        out.append(TrustFlag("extrapolation", "caution",
                             f"{k} grid point(s) lie outside the range of the data; the curve "
                             "there is not supported by observations.",
                             {"points": k, "grid_min": float(grid.x.min()),
                              "grid_max": float(grid.x.max())}))
    return tuple(out)


def _from_diagnostics(d: Diagnostics, n: int) -> list[TrustFlag]:
    out: list[TrustFlag] = []
    lof = d.lack_of_fit
    if lof is not None and lof.p_value < TEST_ALPHA:
        out.append(TrustFlag("lack_of_fit", "serious",
                             "Replicated x values show the curve misses the level means by more "
                             "than the replicate scatter explains: the model shape is wrong.",
                             {"f": lof.f, "p_value": lof.p_value, "df": (lof.df_lack, lof.df_pure),
                              "alpha": TEST_ALPHA}))
    tests = {t.name: t for t in d.tests}
    sw, bp, dw = tests.get("shapiro_wilk"), tests.get("breusch_pagan"), tests.get("durbin_watson")
    if sw is not None and sw.p_value < TEST_ALPHA:
        out.append(TrustFlag("non_normal_residuals", "caution",
                             "The residuals do not look normally distributed (Shapiro-Wilk), so "
                             "p-values and bands may be off.",
                             {"statistic": sw.statistic, "p_value": sw.p_value,
                              "alpha": TEST_ALPHA}))
    if bp is not None and bp.p_value < TEST_ALPHA:
        out.append(TrustFlag("non_constant_variance", "caution",
                             "The scatter changes along x (Breusch-Pagan); consider weights "
                             "(inverse variances) or a transform of y.",
                             {"statistic": bp.statistic, "p_value": bp.p_value,
                              "alpha": TEST_ALPHA}))
    if dw is not None and not math.isnan(dw.statistic) and not DW_LOW <= dw.statistic <= DW_HIGH:
        out.append(TrustFlag("serial_correlation", "caution",
                             "Neighbouring residuals (in the given order) are correlated "
                             "(Durbin-Watson), so the uncertainties are likely understated.",
                             {"statistic": dw.statistic, "range": (DW_LOW, DW_HIGH)}))
    if d.outliers:
        out.append(TrustFlag("outliers", "caution",
                             f"{len(d.outliers)} point(s) sit further from the curve than the "
                             "Bonferroni-adjusted studentized-residual limit.",
                             {"indices": d.outliers, "threshold": d.thresholds["outlier_t"]}))
    if d.influential:
        out.append(TrustFlag("influential_points", "caution",
                             f"{len(d.influential)} point(s) change the fit strongly on their "
                             "own (Cook's distance); check them.",
                             {"indices": d.influential,
                              "threshold": d.thresholds["cooks_distance"]}))
    if d.high_leverage:
        out.append(TrustFlag("high_leverage", "info",
                             f"{len(d.high_leverage)} point(s) have high leverage (x far from "
                             "the rest), so the curve leans on them.",
                             {"indices": d.high_leverage, "threshold": d.thresholds["leverage"]}))
    return out
