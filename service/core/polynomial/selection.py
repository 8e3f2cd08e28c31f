"""Candidate table over degrees and the hierarchical choice of one degree.

Every candidate of degree ``k`` contains all lower powers (hierarchy).

Rules
-----
sequential_f
    Start at ``min_degree``; while the next power's sequential F — its
    sum of squares (one df) over the residual mean square of the larger
    model — is significant at ``alpha``, add it. Stop at the first power
    that is not significant; higher powers are not examined.
aic, aicc, bic, press
    The candidate with the smallest value (ties: the lower degree).
adj_r2
    The candidate with the largest adjusted R² (ties: the lower degree).

A candidate that fits exactly (zero residual up to rounding) ends the
search: no higher degree can fit better, and the criteria are undefined.
"""

from __future__ import annotations

import math

from service.core.polynomial.summary import Measures
from service.core.results import Candidate

_CRITERION = {"aic": ("aic", "AIC", min), "aicc": ("aicc", "AICc", min),
              "bic": ("bic", "BIC", min), "press": ("press", "PRESS", min),
              "adj_r2": ("adj_r_squared", "adjusted R²", max)}


def term(k: int) -> str:
    """Name of the power ``k`` (``"x"``, ``"x^2"``...)."""
    return "x" if k == 1 else f"x^{k}"


def candidate_row(m: Measures) -> Candidate:
    """One row of the selection trail."""
    return Candidate(m.degree, m.df_residual, m.rss, m.sigma, m.r_squared, m.adj_r_squared,
                     m.aic, m.aicc, m.bic, m.press, m.f_last, m.p_last)


def choose(method: str, cands: list[Measures], alpha: float) -> tuple[int, str]:
    """Return ``(chosen_degree, one-line reason)`` for the candidates (ascending degree)."""
    lo, hi = cands[0].degree, cands[-1].degree
    exact = next((m for m in cands if m.exact), None)
    if exact is not None and (method != "sequential_f" or _seq_reaches(cands, alpha, exact)):
        return exact.degree, (f"Degree {exact.degree} fits the data exactly (zero residual up "
                              "to rounding); no higher degree can fit better.")
    if method == "sequential_f":
        chosen = cands[0]
        for nxt in cands[1:]:
            if not nxt.p_last < alpha:
                return chosen.degree, (
                    f"Degree {chosen.degree}: adding {term(nxt.degree)} was not significant "
                    f"(F = {nxt.f_last:.4g}, p = {nxt.p_last:.3g} >= alpha {alpha:g}).")
            chosen = nxt
        if len(cands) == 1:
            return chosen.degree, f"Degree {chosen.degree} is the only candidate."
        return chosen.degree, (
            f"Degree {chosen.degree}: every power up to max_degree {hi} was significant "
            f"(last F = {chosen.f_last:.4g}, p = {chosen.p_last:.3g} < alpha {alpha:g}); "
            "consider a larger max_degree.")
    attr, label, best = _CRITERION[method]
    usable = [m for m in cands if not math.isnan(getattr(m, attr))]
    if not usable:
        return lo, (f"{label} is undefined for every candidate (too few points); "
                    f"fell back to the lowest degree {lo}.")
    key = getattr
    target = best(getattr(m, attr) for m in usable)
    chosen = next(m for m in usable if key(m, attr) == target)
    word = "smallest" if best is min else "largest"
    return chosen.degree, (f"Degree {chosen.degree} has the {word} {label} "
                           f"({target:.6g}) among degrees {lo}..{hi}.")


def _seq_reaches(cands: list[Measures], alpha: float, exact: Measures) -> bool:
    """True when sequential F would climb to the exact-fit degree."""
    for m in cands[1:]:
        if m.degree > exact.degree:
            break
        if m.exact:
            return True
        if not m.p_last < alpha:
            return False
    return True
