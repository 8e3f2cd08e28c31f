"""Run a :class:`~.layout.Layout`: one forward sweep for values, one backward sweep per Jacobian.

The steps are closures built once per model; a call copies the register
template, drops x and the parameter values into their registers and runs the
steps in order. The Jacobian comes from one backward (adjoint) sweep that
reuses the forward values: each step costs a few array operations on n
points whatever the number of parameters, and steps that lead to no
parameter are left out. ``derivative_x`` is the same sweep aimed at x.

Callers run these under ``np.errstate(all="ignore")`` (see :mod:`.model`).
"""

from __future__ import annotations

import numpy as np

from service.core.nonlinear.expression.layout import Layout
from service.core.nonlinear.expression.rules import ONE, backward_step, forward_step


class Program:
    """Compiled sweeps of one expression over ``n_parameters`` parameters.

    Parameters
    ----------
    layout : Layout
        The flat instruction list from :func:`~.layout.lay_out`.
    """

    __slots__ = ("_registers", "_x", "_parameters", "_forward", "_theta_sweep", "_x_sweep",
                 "_root", "_columns", "_root_on_x")

    def __init__(self, layout: Layout) -> None:
        self._registers = list(layout.registers)
        self._x = layout.x_registers
        self._parameters = tuple((register, index)
                                 for index, registers in enumerate(layout.parameter_registers)
                                 for register in registers)
        self._columns = layout.parameter_registers
        self._root = layout.root
        self._root_on_x = layout.root_on_x
        self._forward = tuple(forward_step(ins.op, ins.out, ins.inputs)
                              for ins in layout.instructions)
        self._theta_sweep = tuple(
            backward_step(ins.op, ins.out, ins.inputs, ins.on_theta, ins.exponent)
            for ins in reversed(layout.instructions) if any(ins.on_theta))
        self._x_sweep = tuple(
            backward_step(ins.op, ins.out, ins.inputs, ins.on_x, ins.exponent)
            for ins in reversed(layout.instructions) if any(ins.on_x))

    def _run_forward(self, x: np.ndarray, theta: np.ndarray) -> list:
        v = self._registers.copy()
        for register in self._x:
            v[register] = x
        for register, index in self._parameters:
            v[register] = theta[index]
        for step in self._forward:
            step(v)
        return v

    def values(self, x: np.ndarray, theta: np.ndarray) -> np.ndarray:
        """Model values at the points ``x`` (float64, shape (n,))."""
        out = np.empty(x.shape[0])
        out[:] = self._run_forward(x, theta)[self._root]
        return out

    def values_and_jacobian(self, x: np.ndarray,
                            theta: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Values (n,) and d value / d theta (n, p) from one forward and one backward sweep."""
        v = self._run_forward(x, theta)
        g = [None] * len(v)
        g[self._root] = ONE
        for step in self._theta_sweep:
            step(v, g)
        n = x.shape[0]
        values = np.empty(n)
        values[:] = v[self._root]
        jacobian = np.empty((n, len(self._columns)))
        for index, registers in enumerate(self._columns):
            column = g[registers[0]]
            for register in registers[1:]:
                column = column + g[register]
            jacobian[:, index] = column
        return values, jacobian

    def derivative_x(self, x: np.ndarray, theta: np.ndarray) -> np.ndarray:
        """d value / d x at the points ``x`` (n,); zeros when the model ignores x."""
        out = np.zeros(x.shape[0])
        if not self._root_on_x:
            return out
        v = self._run_forward(x, theta)
        g = [None] * len(v)
        g[self._root] = ONE
        for step in self._x_sweep:
            step(v, g)
        total = g[self._x[0]]
        for register in self._x[1:]:
            total = total + g[register]
        out[:] = total
        return out
