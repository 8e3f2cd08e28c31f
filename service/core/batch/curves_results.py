"""Columnar result of a nonlinear batch: one row per series, in input order.

Numbers only (NaN for undefined); the wire and DataFrame layers choose names
and turn NaN into null. Rows whose series could not be fitted have ``ok``
False and their typed error in ``errors``. Flags are a bit mask over
:data:`CURVE_FLAG_CODES` with two bits of severity per code (as the polynomial
batch's ``flags``/``flag_levels``).
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field

import numpy as np

from service.core.batch.engine import SEVERITIES  # noqa: F401  (re-exported)
from service.core.batch.results import flags_of, levels_of
from service.core.errors import FitError
from service.core.results import Notice

CURVE_FLAG_CODES = ("not_converged", "parameters_not_identifiable", "parameter_at_bound",
                    "parameters_nearly_redundant", "poorly_determined_parameter",
                    "chi_square_fit_failed", "exact_fit", "no_residual_df",
                    "few_points_per_parameter", "lack_of_fit", "non_normal_residuals",
                    "non_constant_variance", "serial_correlation", "outliers",
                    "influential_points", "high_leverage")
FLOAT_SCALARS = ("rss", "sigma", "r_squared", "adj_r_squared", "aic", "aicc", "bic",
                 "relative_offset", "shapiro_wilk", "shapiro_wilk_p", "durbin_watson",
                 "durbin_watson_p", "breusch_pagan", "breusch_pagan_p", "lack_of_fit_f",
                 "lack_of_fit_p", "chi_square_fit", "chi_square_fit_p")
INT_SCALARS = ("n", "df_residual", "iterations", "n_outliers", "n_influential",
               "n_high_leverage", "flags", "flag_levels")
TEXT_SCALARS = ("termination", "start_strategy")
CURVE_SCALARS = ("n", "df_residual", "rss", "sigma", "r_squared", "adj_r_squared", "aic", "aicc",
                 "bic", "converged", "termination", "iterations", "relative_offset",
                 "start_strategy", "shapiro_wilk", "shapiro_wilk_p", "durbin_watson",
                 "durbin_watson_p", "breusch_pagan", "breusch_pagan_p", "lack_of_fit_f",
                 "lack_of_fit_p", "chi_square_fit", "chi_square_fit_p", "n_outliers",
                 "n_influential", "n_high_leverage", "flags", "flag_levels")
"""Every per-series column, in the order the frames list them (``chi_square_fit`` and its
``_p``: the goodness-of-fit test with known SDs, NaN with relative weights)."""


def curve_flags_of(mask: int, levels: int) -> tuple[tuple[str, str], ...]:
    """``(code, severity)`` of each flag of a bit mask over :data:`CURVE_FLAG_CODES`."""
    return flags_of(mask, levels, CURVE_FLAG_CODES)


def curve_levels_of(flags) -> tuple[int, int]:
    """Bit mask and severity levels of a report's :class:`TrustFlag` tuple."""
    return levels_of(flags, CURVE_FLAG_CODES)


@dataclass(frozen=True)
class CurveBatchResult:
    """Results of ``G`` nonlinear fits of one model, aligned with the input order.

    Attributes
    ----------
    family : str
    parameter_names : tuple of str
        The fitted (free) parameters, the columns of ``estimates``.
    ok : (G,) bool
    estimates, std_errors : (G, p) float
    columns : mapping name -> (G,) array for every name in :data:`CURVE_SCALARS`
        (``converged`` bool; ``termination`` and ``start_strategy`` str, "" on error
        rows; integer columns -1 (``n``) or 0 on error rows).
    compiled : (G,) bool
        Rows the compiled engine fitted (the others went through the single-fit engine).
    errors : mapping row -> FitError
    reports : mapping row -> NonlinearReport (``detail="full"``, and rows fitted one by one)
    notices : mapping row -> tuple of Notice
    """

    family: str
    parameter_names: tuple[str, ...]
    ok: np.ndarray
    estimates: np.ndarray
    std_errors: np.ndarray
    columns: Mapping[str, np.ndarray]
    compiled: np.ndarray
    errors: Mapping[int, FitError] = field(default_factory=dict)
    reports: Mapping[int, object] = field(default_factory=dict)
    notices: Mapping[int, tuple[Notice, ...]] = field(default_factory=dict)

    def __len__(self) -> int:
        return int(self.ok.size)

    @property
    def n_ok(self) -> int:
        return int(self.ok.sum())

    flags_of = staticmethod(curve_flags_of)

    def flag_severities(self, row: int) -> tuple[tuple[str, str], ...]:
        """``(code, severity)`` of each flag of one row."""
        return curve_flags_of(int(self.columns["flags"][row]),
                              int(self.columns["flag_levels"][row]))


def empty_curve_columns(G: int, p: int) -> dict:
    """Output arrays for ``G`` rows of ``p`` parameters, every row in its error state."""
    cols = {name: np.full(G, np.nan) for name in FLOAT_SCALARS}
    cols.update({name: np.zeros(G, dtype=np.int64) for name in INT_SCALARS})
    cols["n"][:] = -1
    cols["converged"] = np.zeros(G, dtype=bool)
    cols.update({name: np.full(G, "", dtype=object) for name in TEXT_SCALARS})
    return {"columns": cols, "estimates": np.full((G, p), np.nan),
            "std_errors": np.full((G, p), np.nan), "ok": np.zeros(G, dtype=bool),
            "compiled": np.zeros(G, dtype=bool), "errors": {}, "reports": {}, "notices": {}}


def fill_from_report(out: dict, row: int, report) -> None:
    """Copy one single-series :class:`NonlinearReport` into row ``row``."""
    cols = out["columns"]
    st, info, d = report.statistics, report.fit_info, report.diagnostics
    cols["n"][row], cols["df_residual"][row] = st.n, st.df_residual
    for name in ("rss", "sigma", "r_squared", "adj_r_squared", "aic", "aicc", "bic"):
        cols[name][row] = getattr(st, name)
    cols["converged"][row] = info.converged
    cols["termination"][row] = info.termination
    cols["iterations"][row] = info.iterations
    cols["relative_offset"][row] = info.relative_offset
    cols["start_strategy"][row] = info.start_strategy
    if d is not None:
        tests = {t.name: t for t in d.tests}
        for name in ("shapiro_wilk", "breusch_pagan", "durbin_watson", "chi_square_fit"):
            if name in tests:
                cols[name][row] = tests[name].statistic
                cols[name + "_p"][row] = tests[name].p_value
        if d.lack_of_fit is not None:
            cols["lack_of_fit_f"][row] = d.lack_of_fit.f
            cols["lack_of_fit_p"][row] = d.lack_of_fit.p_value
        cols["n_outliers"][row] = len(d.outliers)
        cols["n_influential"][row] = len(d.influential)
        cols["n_high_leverage"][row] = len(d.high_leverage)
    cols["flags"][row], cols["flag_levels"][row] = curve_levels_of(report.flags)
    names = out["names"]
    by_name = {r.term: r for r in report.coefficients}
    out["estimates"][row] = [by_name[n].estimate for n in names]
    out["std_errors"][row] = [by_name[n].std_error for n in names]
    out["ok"][row] = True
    if report.warnings:
        out["notices"][row] = tuple(report.warnings)
