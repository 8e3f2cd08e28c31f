"""Brent's bracketed root finder (Brent 1973) stepping many brackets together.

Each bracket keeps its own state and follows the same rules, step for step and with
the same tolerances, as the scalar search of :func:`service.core.models.curve_reader._brent`
(``scipy.optimize.brentq`` with ``xtol = 4 eps max(|a|, |b|)``, ``rtol = 4 eps``, 200
iterations): inverse quadratic or secant steps while they shrink fast enough, bisection
otherwise. Only the function evaluations are shared: each round evaluates the function
once for every bracket still open, so a plate of readings costs one array call per round
instead of one Python call per reading and round.

A bracket that meets a NaN, has a non-finite end, or is not converged after
:data:`MAXITER` rounds is handed back unresolved, for the caller to decide.
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np

_EPS = float(np.finfo(float).eps)
RTOL = 4 * _EPS
MAXITER = 200

BatchFunction = Callable[[np.ndarray, np.ndarray], np.ndarray]


def brent_many(fn: BatchFunction, a, b) -> tuple[np.ndarray, np.ndarray]:
    """Roots of ``fn`` on the brackets ``[a_i, b_i]``, all searched together.

    Parameters
    ----------
    fn : callable
        ``fn(x, rows)``: the function of bracket ``rows[j]`` at ``x[j]`` for every j
        (``rows`` indexes the brackets; one call per round).
    a, b : array_like
        Bracket ends, ``a_i < b_i``, normally found on a grid.

    Returns
    -------
    roots : ndarray
        The root of each bracket. Where re-evaluating the ends shows no sign change
        (rounding) or a non-finite value, the end nearer zero, as the scalar search does.
    resolved : ndarray of bool
        False where the search met a NaN or did not converge (the scalar search raises),
        or an end was not finite (a model that fails on one point fails the whole call,
        so the scalar search decides).
    """
    a = np.asarray(a, dtype=float)
    b = np.asarray(b, dtype=float)
    if a.size == 0:
        return np.empty(0), np.ones(0, dtype=bool)
    rows = np.arange(a.size)
    fa, fb = fn(a, rows), fn(b, rows)
    roots = np.full(a.size, np.nan)
    resolved = np.ones(a.size, dtype=bool)
    with np.errstate(all="ignore"):
        finite = np.isfinite(fa) & np.isfinite(fb)
        no_change = ~finite | (fa * fb > 0)
        nearer = np.where((np.abs(fa) <= np.abs(fb)) | ~np.isfinite(fb), a, b)
        roots[no_change] = nearer[no_change]
        # a non-finite end may come from another bracket's point failing the shared call
        resolved[~finite] = False
        at_a = ~no_change & (fa == 0)
        at_b = ~no_change & ~at_a & (fb == 0)
        roots[at_a], roots[at_b] = a[at_a], b[at_b]
        search = ~(no_change | at_a | at_b)
        xtol = 4 * _EPS * np.maximum(np.maximum(np.abs(a), np.abs(b)), 1e-300)
        state = _BrentState(rows[search], a[search], b[search], fa[search], fb[search],
                            xtol[search])
        for _ in range(MAXITER):
            done, values = state.converged()
            roots[state.rows[done]] = values
            state.keep(~done)
            if state.rows.size == 0:
                break
            state.step()
            state.fcur = np.asarray(fn(state.xcur, state.rows), dtype=float)
            lost = np.isnan(state.fcur)
            resolved[state.rows[lost]] = False
            state.keep(~lost)
        resolved[state.rows] = False  # not converged within MAXITER rounds
    return roots, resolved


class _BrentState:
    """The open brackets: current best ``xcur``, previous ``xpre``, the far end ``xblk``."""

    def __init__(self, rows, a, b, fa, fb, xtol) -> None:
        self.rows, self.xtol = rows, xtol
        self.xpre, self.fpre = a.copy(), fa.copy()
        self.xcur, self.fcur = b.copy(), fb.copy()
        self.xblk, self.fblk = np.zeros_like(a), np.zeros_like(a)
        self.spre, self.scur = np.zeros_like(a), np.zeros_like(a)
        self.delta = self.sbis = np.zeros_like(a)

    def keep(self, mask: np.ndarray) -> None:
        if mask.all():
            return
        for name in ("rows", "xtol", "xpre", "fpre", "xcur", "fcur", "xblk", "fblk", "spre",
                     "scur", "delta", "sbis"):
            setattr(self, name, getattr(self, name)[mask])

    def converged(self) -> tuple[np.ndarray, np.ndarray]:
        """Re-bracket, put the smaller value in ``xcur``; which brackets are done, at what x."""
        change = self.fpre * self.fcur < 0
        self.xblk = np.where(change, self.xpre, self.xblk)
        self.fblk = np.where(change, self.fpre, self.fblk)
        self.spre = np.where(change, self.xcur - self.xpre, self.spre)
        self.scur = np.where(change, self.xcur - self.xpre, self.scur)
        swap = np.abs(self.fblk) < np.abs(self.fcur)
        old_x, old_f = self.xcur, self.fcur
        self.xcur = np.where(swap, self.xblk, self.xcur)
        self.fcur = np.where(swap, self.fblk, self.fcur)
        self.xpre = np.where(swap, old_x, self.xpre)
        self.fpre = np.where(swap, old_f, self.fpre)
        self.xblk = np.where(swap, old_x, self.xblk)
        self.fblk = np.where(swap, old_f, self.fblk)
        self.delta = (self.xtol + RTOL * np.abs(self.xcur)) / 2
        self.sbis = (self.xblk - self.xcur) / 2
        done = (self.fcur == 0) | (np.abs(self.sbis) < self.delta)
        return done, self.xcur[done]

    def step(self) -> None:
        """One interpolation step where it is safe, bisection elsewhere; then move xcur."""
        delta, sbis = self.delta, self.sbis
        fcur, fpre, fblk = self.fcur, self.fpre, self.fblk
        xcur, xpre, xblk = self.xcur, self.xpre, self.xblk
        secant = -fcur * (xcur - xpre) / (fcur - fpre)
        dpre = (fpre - fcur) / (xpre - xcur)
        dblk = (fblk - fcur) / (xblk - xcur)
        quadratic = -fcur * (fblk * dblk - fpre * dpre) / (dblk * dpre * (fblk - fpre))
        trial = np.where(xpre == xblk, secant, quadratic)
        room = np.abs(self.spre)
        limit = np.where(room < 3 * np.abs(sbis) - delta, room, 3 * np.abs(sbis) - delta)
        interpolate = ((np.abs(self.spre) > delta) & (np.abs(fcur) < np.abs(fpre))
                       & (2 * np.abs(trial) < limit))
        self.spre = np.where(interpolate, self.scur, sbis)
        self.scur = np.where(interpolate, trial, sbis)
        self.xpre, self.fpre = xcur, fcur
        move = np.where(np.abs(self.scur) > delta, self.scur, np.where(sbis > 0, delta, -delta))
        self.xcur = xcur + move
