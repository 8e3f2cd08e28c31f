"""Counted, guarded evaluation of the weighted residuals shared by every solver phase.

:class:`Objective` counts model and Jacobian evaluations against one budget,
remembers the best finite point seen, and turns non-finite model values into
a rejected trial point (a huge but finite residual vector, so that scipy's
trust-region methods simply shrink their step). A non-finite Jacobian at a
point the solver accepted, or an exhausted budget, stops the running phase
through a private exception that the caller catches.
"""

from __future__ import annotations

import numpy as np

from service.core.nonlinear.problem import Problem

# Each residual of a rejected point: its sum of squares is 1e300, finite in float64.
_HUGE_SUM_OF_SQUARES = 1e300
# Consecutive non-finite trial points after which a phase gives up: each rejection
# shrinks the trust region at least twofold, so by then steps are below resolution.
MAX_NON_FINITE_IN_A_ROW = 60


def sum_of_squares(rw: np.ndarray) -> float:
    """``rw @ rw``; when that overflows, the largest float64 (keeps the order of finite points)."""
    rss = float(rw @ rw)
    return rss if rss < np.inf else float(np.finfo(float).max)


class StopPhase(Exception):  # noqa: N818  (control flow, not an error)
    """Raised inside a solver callback to end the running phase (``reason``: a code)."""

    def __init__(self, reason: str) -> None:
        super().__init__(reason)
        self.reason = reason


class Objective:
    """Weighted residuals ``r = sqrt(w) (y - f)`` with counting and a budget.

    Parameters
    ----------
    problem : Problem
        The validated problem.
    max_jacobians : int
        Budget of Jacobian evaluations (iterations) over all phases.
    max_values : int
        Budget of model evaluations over all phases.
    """

    def __init__(self, problem: Problem, max_jacobians: int, max_values: int) -> None:
        self.problem = problem
        self.max_jacobians = max_jacobians
        self.max_values = max_values
        self.nfev = 0
        self.njev = 0
        self.non_finite = 0
        self._in_a_row = 0
        self.best_theta: np.ndarray | None = None
        self.best_rss = np.inf
        self._fill = np.full(problem.n, np.sqrt(_HUGE_SUM_OF_SQUARES / problem.n))

    @property
    def exhausted(self) -> bool:
        return self.njev >= self.max_jacobians or self.nfev >= self.max_values

    def _note(self, theta: np.ndarray, rw: np.ndarray) -> float:
        rss = sum_of_squares(rw)
        if self.best_theta is None or rss < self.best_rss:
            self.best_rss, self.best_theta = rss, theta.copy()
        return rss

    def residuals(self, theta: np.ndarray) -> tuple[np.ndarray | None, float]:
        """``(r, rss)`` at ``theta``; ``(None, inf)`` when the model is not finite there."""
        if self.nfev >= self.max_values:
            raise StopPhase("iteration_limit")
        self.nfev += 1
        f = self.problem.values(theta)
        rw = None if f is None else self.problem.sqrt_weights * (self.problem.y - f)
        if rw is None or not np.isfinite(rw).all():
            self.non_finite += 1
            self._in_a_row += 1
            if self._in_a_row >= MAX_NON_FINITE_IN_A_ROW:
                self._in_a_row = 0
                raise StopPhase("non_finite_model")
            return None, np.inf
        self._in_a_row = 0
        return rw, self._note(theta, rw)

    def linearize(self, theta: np.ndarray):
        """``(r, Jw, rss)`` at ``theta`` (Jw: weighted model Jacobian); Nones when not finite."""
        if self.njev >= self.max_jacobians or self.nfev >= self.max_values:
            raise StopPhase("iteration_limit")
        self.nfev += 1
        self.njev += 1
        f, jac = self.problem.values_and_jacobian(theta)
        if f is None or jac is None:
            self.non_finite += 1
            return None, None, np.inf
        sw = self.problem.sqrt_weights
        rw = sw * (self.problem.y - f)
        jw = sw[:, None] * jac
        if not (np.isfinite(rw).all() and np.isfinite(jw).all()):
            self.non_finite += 1
            return None, None, np.inf
        return rw, jw, self._note(theta, rw)

    # scipy callbacks: scipy minimises 0.5 ||F||^2 with F = sqrt(w) (f - y) = -r.
    def scipy_fun(self, theta: np.ndarray) -> np.ndarray:
        rw, _ = self.residuals(theta)
        return self._fill if rw is None else -rw

    def scipy_jac(self, theta: np.ndarray) -> np.ndarray:
        if self.njev >= self.max_jacobians:
            raise StopPhase("iteration_limit")
        self.njev += 1
        f, jac = self.problem.values_and_jacobian(theta)
        if jac is None:
            self.non_finite += 1
            raise StopPhase("non_finite_model")
        return self.problem.sqrt_weights[:, None] * jac
