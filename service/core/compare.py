"""Choosing between model families: fit every candidate, compare, and say why one won.

Every candidate is fitted by its own family (through the registry) to the same
series. The comparison table has, per candidate, its family and parameter count,
residual SS, residual df, sigma, AIC, AICc, BIC, whether it converged, and its
flags; a candidate that cannot be fitted is reported with its error, not fatal.

Selection rules:

* ``aic``, ``aicc``, ``bic``: the smallest criterion among the candidates that
  fitted and converged. The criteria use one likelihood convention for every
  family (Gaussian at the ML variance, ``k`` = number of fitted coefficients; see
  :mod:`service.core.polynomial.summary`), so they are comparable across families
  fitted to the same y (the same ``transform_y`` and weights).
* ``f_test``: nested pairs are compared by the extra-sum-of-squares F test
  (Bates & Watts 1988, §3.10; common practice for nested nonlinear models),
  walking from the simplest candidate to richer ones that contain it: a richer
  model is taken only when it is significantly better at ``alpha``. Candidates
  that nest nothing are ranked by AICc among the survivors of the walk.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, NamedTuple

from scipy import special

from service.core import families
from service.core.errors import FitError, SpecError
from service.core.spec import FitOptions, ModelSpec

SELECT = ("aicc", "aic", "bic", "f_test")
CRITERIA = {"aicc": "AICc", "aic": "AIC", "bic": "BIC"}
NAN = float("nan")


class CandidateRow(NamedTuple):
    """One candidate of the comparison (NaN numbers when it could not be fitted)."""

    label: str
    family: str
    n_parameters: int
    rss: float
    df_residual: int
    sigma: float
    aic: float
    aicc: float
    bic: float
    converged: bool
    flags: tuple[str, ...]
    error: str | None


class NestedTest(NamedTuple):
    """Extra-sum-of-squares F test of a candidate against a richer one that contains it."""

    simpler: str
    richer: str
    f: float
    df_numerator: int
    df_denominator: int
    p_value: float


@dataclass(frozen=True, slots=True)
class Comparison:
    """The comparison table, the nested tests, the chosen candidate and why."""

    select: str
    alpha: float
    candidates: tuple[CandidateRow, ...]
    nested_tests: tuple[NestedTest, ...]
    chosen: int
    reason: str
    report: Any  # the chosen candidate's full report
    reports: tuple[Any, ...] = ()  # every candidate's report, None where it failed (figures)


_OPTIONS = FitOptions()


def compare(x, y, weights=None, *, candidates: tuple[ModelSpec, ...], select: str = "aicc",
            alpha: float = 0.05, options: FitOptions = _OPTIONS) -> Comparison:
    """Fit every candidate to the same series and choose one.

    Raises
    ------
    SpecError
        Fewer than two candidates, an unknown rule, or candidates on different y scales.
    FitError
        Every candidate failed (the first failure, naming its candidate).
    """
    _check(candidates, select, alpha)
    for i, spec in enumerate(candidates):  # a malformed candidate is the caller's to fix
        try:
            families.family(spec.family).check_spec(spec, options)
        except SpecError as exc:
            field = exc.field or "model"
            if field.startswith("model"):
                field = f"model.candidates[{i}]{field.removeprefix('model')}"
            raise SpecError(exc.message, field=field, fix=exc.fix, code=exc.code) from exc
    reports, rows, failures = [], [], []
    for i, spec in enumerate(candidates):
        label = _label(spec, i)
        try:
            report = families.fit_series(x, y, weights, model=spec, options=options)
        except FitError as exc:  # this series cannot be fitted by this candidate: reported
            failures.append((i, label, exc))
            reports.append(None)
            rows.append(CandidateRow(label, spec.family, 0, NAN, 0, NAN, NAN, NAN, NAN, False,
                                     (), exc.message))
            continue
        reports.append(report)
        rows.append(_row(label, spec.family, report))
    crit = _crit(select)
    usable = [i for i, r in enumerate(rows) if r.converged and math.isfinite(getattr(r, crit))]
    if not usable:
        raise _nothing_to_compare(rows, crit, failures)
    rows = _unique_labels(rows)
    tests = _nested_tests(candidates, rows, usable)
    chosen, reason = _choose(select, alpha, rows, usable, tests)
    return Comparison(select, alpha, tuple(rows), tuple(tests), chosen, reason,
                      reports[chosen], tuple(reports))


def _check(candidates, select, alpha) -> None:
    if len(candidates) < 2:
        raise SpecError("A comparison needs at least two candidates.", field="model.candidates",
                        fix="List two or more model objects, or send one model without "
                            "candidates.")
    if select not in SELECT:
        raise SpecError(f"Unknown select rule {select!r}.", field="model.select",
                        fix=f"Use one of {', '.join(SELECT)}.")
    if not 0.0 < alpha < 1.0:
        raise SpecError(f"alpha = {alpha!r} is not between 0 and 1.", field="model.alpha",
                        fix="Use a significance level such as 0.05.")
    scales = {spec.transform_y for spec in candidates}
    if len(scales) > 1:
        raise SpecError("Candidates fit different transforms of y; their likelihoods are not "
                        "comparable.", field="model.candidates",
                        fix="Give every candidate the same transform_y.")


def _label(spec: ModelSpec, i: int) -> str:
    if spec.family == "polynomial" and spec.degree is not None:
        return f"polynomial degree {spec.degree}"
    return f"{spec.family} #{i}" if spec.family == "expression" else spec.family


def _nothing_to_compare(rows: list[CandidateRow], crit: str,
                       failures: list[tuple[int, str, FitError]]) -> FitError:
    """Why no candidate can be ranked: every candidate's fitting error (each also under
    ``model.candidates[i]`` in ``details``), or no finite criterion."""
    if failures:
        causes = [(i, f"{label}{_field(exc)}: {_cause(exc)}") for i, label, exc in failures]
        listed = " ".join(f"Candidate {i}, {why}" for i, why in causes)
        return FitError(f"No candidate could be fitted. {listed}", field="model.candidates",
                        fix="Follow each candidate's fix (errors names each under "
                            "model.candidates[i]), or drop the candidates the data cannot "
                            "support.",
                        details=tuple((f"model.candidates[{i}]", why) for i, why in causes))
    if all(r.rss == 0.0 for r in rows):
        why = ("every candidate passes through every point (zero residuals), so "
               f"{crit} is not finite")
    else:
        why = f"no candidate converged with a finite {crit}"
    return FitError(f"No candidate can be ranked: {why}.", field="model.candidates",
                    fix="Compare on data with noise and more points than parameters, or fit "
                        "one model without candidates.")


def _field(exc: FitError) -> str:
    return f", field {exc.field}" if exc.field else ""


def _cause(exc: FitError) -> str:
    """One candidate's error in words: its message and its fix."""
    return exc.message + (f" To fix: {exc.fix}" if exc.fix else "")


def _unique_labels(rows: list[CandidateRow]) -> list[CandidateRow]:
    seen: dict[str, int] = {}
    for r in rows:
        seen[r.label] = seen.get(r.label, 0) + 1
    return [r._replace(label=f"{r.label} #{i}") if seen[r.label] > 1 and "#" not in r.label
            else r for i, r in enumerate(rows)]


def _crit(select: str) -> str:
    return "aicc" if select == "f_test" else select


def _row(label: str, family: str, report) -> CandidateRow:
    st = report.statistics
    info = getattr(report, "fit_info", None)
    converged = True if info is None else bool(info.converged)
    if family == "polynomial":
        label = f"polynomial degree {report.model.degree}"
    elif family == "expression":
        label = report.model.expression
    return CandidateRow(label, family, st.n_parameters, st.rss, st.df_residual, st.sigma,
                        st.aic, st.aicc, st.bic, converged,
                        tuple(f.code for f in report.flags if f.severity != "info"), None)


def _nested_tests(candidates, rows, usable) -> list[NestedTest]:
    tests = []
    for i in usable:
        for j in usable:
            if i != j and _nests(candidates[i], candidates[j], rows[i], rows[j]):
                tests.append(_f_test(rows[i], rows[j]))
    return tests


def _nests(small: ModelSpec, big: ModelSpec, rs: CandidateRow, rb: CandidateRow) -> bool:
    """Whether ``small`` is a special case of ``big`` (so the F test applies)."""
    if rs.n_parameters >= rb.n_parameters:
        return False
    if small.family == big.family == "polynomial":
        return (small.intercept or not big.intercept) and small.transform_x == big.transform_x
    same_terms = small.scale == big.scale and not small.fixed and not big.fixed
    return same_terms and small.family in families.family(big.family).generalizes


def _f_test(small: CandidateRow, big: CandidateRow) -> NestedTest:
    dfn = small.df_residual - big.df_residual
    dfd = big.df_residual
    if dfd > 0 and big.rss > 0:
        f = ((small.rss - big.rss) / dfn) / (big.rss / dfd)
        p = float(special.fdtrc(dfn, dfd, max(f, 0.0)))
    else:
        f = p = NAN
    return NestedTest(small.label, big.label, f, dfn, dfd, p)


def _choose(select, alpha, rows, usable, tests) -> tuple[int, str]:
    if select != "f_test":
        ranked = sorted(usable, key=lambda i: getattr(rows[i], select))
        best, value = ranked[0], getattr(rows[ranked[0]], select)
        gap = ""
        if len(ranked) > 1:
            delta = getattr(rows[ranked[1]], select) - value
            gap = f"; next {rows[ranked[1]].label} at +{delta:.2f}"
        name = CRITERIA[select]
        return best, f"{rows[best].label} has the smallest {name} ({value:.4g}){gap}."
    index = {rows[i].label: i for i in usable}
    richer_of: dict[int, list[NestedTest]] = {}
    for t in tests:
        richer_of.setdefault(index[t.simpler], []).append(t)
    roots = [i for i in usable if not any(index[t.richer] == i for t in tests)]
    ends, steps = set(), []
    for current in sorted(roots, key=lambda i: rows[i].n_parameters):
        while current in richer_of:   # the next richer model that contains the current one
            t = min(richer_of[current], key=lambda t: rows[index[t.richer]].n_parameters)
            better = t.p_value < alpha
            steps.append(f"{t.richer} {'improves' if better else 'does not improve'} on "
                         f"{t.simpler} (F = {t.f:.4g}, p = {t.p_value:.2g} "
                         f"{'<' if better else '>='} {alpha:g})")
            if not better:
                break
            current = index[t.richer]
        ends.add(current)
    best = min(ends, key=lambda i: rows[i].aicc)
    why = "; ".join(steps) if steps else "no candidate nests another"
    tail = "; of the models the tests kept, the smallest AICc" if len(ends) > 1 else ""
    return best, f"{rows[best].label}: {why}{tail}."
