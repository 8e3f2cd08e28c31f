"""The starts the compiled multi-start could not solve, re-solved with the single fit's solver.

:func:`.curves_multistart.solve_starts` keeps the lowest converged fit of its starts. A
start that does not converge there (its Levenberg-Marquardt stalls, e.g. with logistic5's
asymmetry running to 0 or to infinity, or ends at an asymmetry <= 0) may still converge,
or end lower, in the single fit, whose solver retries with other methods
(:func:`service.core.nonlinear.builtin.fit.best_fit`). Rather than fitting such a series
again from the start, :func:`settle` solves only those starts, each exactly as the single
fit does (:func:`service.core.nonlinear.builtin.fit.solve_start`, the single fit's own
automatic starts and data), and lets the compiled fit stand when every one of them

* cannot be solved (the single fit passes it over too), or
* ends clearly above the kept residual sum of squares (by :data:`CLEAR`, relative), or
* converges, comes after the kept start in the single fit's order, and is not lower than
  the kept RSS (by :data:`SAME`, a tenth of the single fit's 1e-9): it often reaches the
  very minimum the kernel kept.

Then it is neither the single fit's kept fit (the first converged one of the lowest RSS;
a later one needs an RSS lower by 1e-9 to replace it), nor the lowest of all when it did
not converge (which the single fit would solve on, or report as
``lower_rss_not_converged``), so the single fit keeps the same start and the same
estimates. One more case: a start that converges to the very fit kept here (RSS within
:data:`SAME_MINIMUM`, every estimate within :data:`SAME_ESTIMATES`, both relative) but
comes before the kept start is the one the single fit keeps (the first of the lowest RSS):
the fit stands under that start's name. Otherwise, and when the single fit's starts are
not as many as the kernel's or do not include the kept one, the series goes to the single
fit.
"""

from __future__ import annotations

import numpy as np

from service.core.batch.curves_multistart import failed_starts
from service.core.data.inputs import clean_data
from service.core.errors import SpecError
from service.core.interrupt import checkpoint
from service.core.nonlinear.builtin.catalogue import BUILTINS
from service.core.nonlinear.builtin.definition import series_of
from service.core.nonlinear.builtin.fit import solve_start
from service.core.nonlinear.builtin.spec_check import equation, scale_of
from service.core.nonlinear.builtin.starts import Held, automatic_starts
from service.core.nonlinear.polish import CONVERGED
from service.core.spec import FitOptions, ModelSpec

CLEAR = 1e-7   # far above the 1e-9 of best_fit's comparisons and the solvers' disagreement
SAME = 1e-10   # a tenth of best_fit's SAME_RSS
SAME_MINIMUM = 1e-12    # two solves of one minimum: their RSS agree to rounding (~1e-14)
SAME_ESTIMATES = 1e-8   # and their estimates to the solvers' relative offset of 1e-8


def settle(model: ModelSpec, options: FitOptions, x, y, w, offsets, rows, status,
           kept_rss, kept_start, kept_estimates) -> tuple[np.ndarray, list[str | None]]:
    """For each row of ``rows`` (provisional ``status``, fitted by the kernel at residual
    sum of squares ``kept_rss`` and ``kept_estimates`` from the start named ``kept_start``,
    as :data:`.curves_post.STARTS`): True when the kernel's fit is the single fit's, and
    the name of the start the single fit reports for it when that is another one (else
    None).

    ``model`` has no fixed values, bounds or start values (the compiled engine's models).
    """
    builtin = BUILTINS[model.family]
    scale = scale_of(builtin, model)
    compiled = equation(builtin.name, scale, ())
    free = compiled.parameter_names
    lower, upper = np.full(len(free), -np.inf), np.full(len(free), np.inf)
    held = Held({}, {}, {}, {})
    stands = np.zeros(len(rows), dtype=bool)
    names_kept: list[str | None] = [None] * len(rows)
    for i, row in enumerate(rows.tolist()):
        checkpoint()
        failed, total = failed_starts(status[row])
        a, b = offsets[row], offsets[row + 1]
        with np.errstate(all="ignore"):
            data = clean_data(x[a:b], y[a:b], None if w is None else w[a:b], options.missing)
            starts = automatic_starts(builtin, series_of(data.x, data.y, data.w, scale), held)
            names = [start.strategy for start in starts]
            kept = kept_start[i].removesuffix("_rewritten")
            if len(starts) != total or kept not in names:
                continue
            first = names.index(kept)
            for t in range(total):
                if not failed >> t & 1:
                    continue
                verdict = _verdict(compiled, data, starts[t], lower, upper, kept_rss[i],
                                   kept_estimates[i], t > first)
                if verdict is None:
                    break
                if verdict == "same" and t < first:
                    first = t
            else:
                stands[i] = True
                if names[first] != kept:
                    names_kept[i] = names[first]
    return stands, names_kept


def _verdict(compiled, data, start, lower, upper, kept: float, estimates,
             later: bool) -> str | None:
    """``"clear"`` when the single fit's solve of ``start`` cannot change its kept fit (of
    RSS ``kept``; ``later``: ``start`` comes after the kept one), ``"same"`` when it ends
    at the kept fit itself, None otherwise."""
    try:
        solution = solve_start(compiled, data, start, lower, upper)
    except SpecError:                   # the single fit passes this start over
        return "clear"
    converged = solution.termination in CONVERGED
    if converged and abs(solution.rss - kept) <= SAME_MINIMUM * kept and np.all(
            np.abs(solution.estimates - estimates) <= SAME_ESTIMATES * np.abs(estimates)):
        return "same"
    if later and converged:
        return "clear" if solution.rss > kept * (1.0 - SAME) else None
    return "clear" if solution.rss > kept * (1.0 + CLEAR) else None
