"""The caller's own model equation, parsed safely and compiled with exact derivatives.

Public surface::

    compile_model(text, parameters) -> ExpressionModel
    ExpressionModel: text, parameter_names, tree, values, jacobian,
                     values_and_jacobian, derivative_x
    ExpressionError(SpecError)   code "invalid_expression", field "model.expression"

Pipeline (one module each): :mod:`.scan` (limits and the character scan),
:mod:`.parser` (allow-list walk of Python's syntax tree into :mod:`.nodes`),
:mod:`.names` (parameter list checks), :mod:`.printer` (canonical text),
:mod:`.layout` (flat instruction list, constant folding), :mod:`.rules`
(values and adjoint rules), :mod:`.program` (the sweeps), :mod:`.model`.
The text is never evaluated.
"""

from service.core.nonlinear.expression.errors import ExpressionError
from service.core.nonlinear.expression.model import ExpressionModel, compile_model
from service.core.nonlinear.expression.nodes import FUNCTIONS
from service.core.nonlinear.expression.scan import (
    MAX_DEPTH,
    MAX_EXPONENT,
    MAX_LENGTH,
    MAX_LITERAL,
    MAX_NESTING,
    MAX_NODES,
)

__all__ = [
    "FUNCTIONS",
    "MAX_DEPTH",
    "MAX_EXPONENT",
    "MAX_LENGTH",
    "MAX_LITERAL",
    "MAX_NESTING",
    "MAX_NODES",
    "ExpressionError",
    "ExpressionModel",
    "compile_model",
]
