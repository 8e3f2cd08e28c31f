"""Tree to a flat instruction list over numbered registers, folding constant parts.

Every sub-expression that depends on neither x nor a parameter is computed
once here, with the same numpy float64 arithmetic used at run time, and
becomes a constant register. Folding refuses instead of overflowing: a
constant exponent larger than :data:`~.scan.MAX_EXPONENT` in size, or a
constant part that is not a finite number, is an :class:`ExpressionError`.
Each occurrence of ``x`` or of a parameter gets its own register, so that
the backward sweep can give each occurrence its own adjoint.
"""

from __future__ import annotations

from typing import NamedTuple

import numpy as np

from service.core.nonlinear.expression.errors import refuse
from service.core.nonlinear.expression.nodes import (
    Binary,
    Call,
    Negate,
    Node,
    Number,
    Parameter,
    Pi,
    Variable,
)
from service.core.nonlinear.expression.printer import canonical_text
from service.core.nonlinear.expression.rules import VALUE
from service.core.nonlinear.expression.scan import MAX_EXPONENT


class Instruction(NamedTuple):
    """``registers[out] = op(registers[inputs...])``.

    ``on_theta``/``on_x`` tell, per input, whether it depends on a parameter
    or on x; ``exponent`` is a power's exponent when that is a constant.
    """

    op: str
    out: int
    inputs: tuple[int, ...]
    on_theta: tuple[bool, ...]
    on_x: tuple[bool, ...]
    exponent: np.float64 | None


class Layout(NamedTuple):
    """The flat program: initial registers, instructions in evaluation order, inputs."""

    registers: tuple  # constants in place, None where filled or computed per call
    instructions: tuple[Instruction, ...]
    x_registers: tuple[int, ...]
    parameter_registers: tuple[tuple[int, ...], ...]  # by parameter index
    root: int
    root_on_x: bool


class _Placed(NamedTuple):
    register: int | None  # None: a constant not yet given a register
    value: np.float64 | None  # the constant's value
    on_theta: bool
    on_x: bool


def lay_out(root: Node, n_parameters: int) -> Layout:
    """Flatten ``root`` into a :class:`Layout` (post-order; depth is already bounded).

    Raises
    ------
    ExpressionError
        A constant exponent over the limit, or a constant part that is not finite.
    """
    builder = _Builder(n_parameters)
    placed = builder.place(root)
    register = builder.register_of(placed)
    return Layout(tuple(builder.registers), tuple(builder.instructions),
                  tuple(builder.x_registers), tuple(map(tuple, builder.parameter_registers)),
                  register, placed.on_x)


class _Builder:
    def __init__(self, n_parameters: int) -> None:
        self.registers: list = []
        self.instructions: list[Instruction] = []
        self.x_registers: list[int] = []
        self.parameter_registers: list[list[int]] = [[] for _ in range(n_parameters)]

    def new_register(self, value=None) -> int:
        self.registers.append(value)
        return len(self.registers) - 1

    def register_of(self, placed: _Placed) -> int:
        if placed.register is None:
            return self.new_register(placed.value)
        return placed.register

    def place(self, node: Node) -> _Placed:
        if isinstance(node, Number):
            return _Placed(None, np.float64(node.value), False, False)
        if isinstance(node, Pi):
            return _Placed(None, np.float64(np.pi), False, False)
        if isinstance(node, Variable):
            register = self.new_register()
            self.x_registers.append(register)
            return _Placed(register, None, False, True)
        if isinstance(node, Parameter):
            register = self.new_register()
            self.parameter_registers[node.index].append(register)
            return _Placed(register, None, True, False)
        if isinstance(node, Binary):
            op, operands = node.op, (self.place(node.left), self.place(node.right))
            if op == "^":
                _check_exponent(node.right, operands[1])
        elif isinstance(node, Negate):
            op, operands = "neg", (self.place(node.operand),)
        elif isinstance(node, Call):
            op, operands = node.function, (self.place(node.argument),)
        else:  # pragma: no cover - the parser builds no other node
            raise TypeError(f"not an expression node: {node!r}")
        return self.operation(node, op, operands)

    def operation(self, node: Node, op: str, operands: tuple[_Placed, ...]) -> _Placed:
        on_theta = tuple(operand.on_theta for operand in operands)
        on_x = tuple(operand.on_x for operand in operands)
        if not any(on_theta) and not any(on_x):
            with np.errstate(all="ignore"):
                value = np.float64(VALUE[op](*(operand.value for operand in operands)))
            if not np.isfinite(value):
                snippet = canonical_text(node)
                snippet = snippet if len(snippet) <= 40 else snippet[:37] + "..."
                raise refuse(f"The constant part {snippet} is not a finite number ({value})",
                             node.column, fix="Correct the constant; it must evaluate to a "
                             "finite number.")
            return _Placed(None, value, False, False)
        exponent = operands[1].value if op == "^" else None
        inputs = tuple(self.register_of(operand) for operand in operands)
        out = self.new_register()
        self.instructions.append(Instruction(op, out, inputs, on_theta, on_x, exponent))
        return _Placed(out, None, any(on_theta), any(on_x))


def _check_exponent(node: Node, exponent: _Placed) -> None:
    if exponent.value is not None and abs(exponent.value) > MAX_EXPONENT:
        raise refuse(f"The constant exponent {exponent.value:g} is larger than "
                     f"{MAX_EXPONENT:g} in size (huge exponents overflow)", node.column,
                     fix=f"Use exponents of at most {MAX_EXPONENT:g} in size; rescale x "
                         "or the parameters instead.")
