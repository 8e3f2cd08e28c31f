"""Fits with known measurement standard deviations, shared by every family.

With ``weighting = "known_sd"`` the weights are ``w_i = 1 / SD_i²`` of a
measurement error the caller knows (from replicate studies or the
instrument's specification). Then, at the least-squares estimate:

* the covariance of the estimates is ``(J'WJ)^-1`` itself: the scale is 1, not
  the residual mean square (sigma is not rescaled);
* limits and bands use the normal distribution, not Student's t, because no
  variance is estimated;
* the weighted residual sum of squares is, under the model, a chi-square on
  ``n - p`` degrees of freedom, which tests the model and the stated SDs
  together (Bevington & Robinson 2003, ch. 11; Press et al., Numerical
  Recipes, 3rd ed., §15.1): too large says the curve misses the data or the
  SDs are understated. The test is one sided (only a too-large sum flags).
"""

from __future__ import annotations

import math

from scipy import special

from service.core.errors import SpecError
from service.core.results import TestResult, TrustFlag

KNOWN_SD = "known_sd"


def require_weights(weighting: str, weights) -> None:
    """Refuse known-SD weighting without weights: the SDs are the whole point of it.

    Raises
    ------
    SpecError
        ``weighting`` is ``"known_sd"`` and ``weights`` is None (names ``weights``).
    """
    if weighting == KNOWN_SD and weights is None:
        raise SpecError("weighting = \"known_sd\" needs the known SDs, but no weights were "
                        "sent.", field="weights",
                        fix="Send weights = 1/SD² for every point (SD of each measurement), "
                        "or use weighting \"relative\".")


def normal_quantile(level: float) -> float:
    """Upper ``(1 - level) / 2`` point of the standard normal (exact for levels near 1)."""
    return float(-special.ndtri(0.5 * (1.0 - level)))


def simultaneous_normal_factor(p: int, level: float) -> float:
    """Scheffé's factor ``sqrt(chi²_p(level))`` of a whole-curve band with a known variance
    (the limit of Working-Hotelling's ``sqrt(p F_{p, df}(level))`` as df grows)."""
    return math.sqrt(float(special.chdtri(p, 1.0 - level)))


def chi_square_fit(rss: float, df: int) -> TestResult | None:
    """The goodness-of-fit test: weighted RSS against chi-square(``df``); None without df.

    Parameters
    ----------
    rss : float
        Weighted residual sum of squares with weights ``1/SD²``.
    df : int
        ``n - p``.
    """
    if df < 1 or not math.isfinite(rss):
        return None
    p_value = float(special.chdtrc(df, rss))
    return TestResult("chi_square_fit", float(rss), p_value, (float(df),),
                      "weighted RSS against chi-square(n - p): with known SDs it should be "
                      "about n - p")


def chi_square_flag(test: TestResult | None, alpha: float) -> TrustFlag | None:
    """``chi_square_fit_failed`` (serious) when the test rejects at ``alpha``, else None."""
    if test is None or not test.p_value < alpha:
        return None
    return TrustFlag("chi_square_fit_failed", "serious",
                     "With the measurement SDs you gave, the residuals are larger than chance "
                     "allows: the model or the stated SDs are wrong.",
                     {"statistic": test.statistic, "p_value": test.p_value,
                      "df": int(test.df[0]), "alpha": alpha})
