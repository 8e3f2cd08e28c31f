"""Parameter names: the caller's list is valid, and the tree uses exactly that list."""

from __future__ import annotations

from collections.abc import Sequence
from keyword import iskeyword

from service.core.nonlinear.expression.errors import ExpressionError
from service.core.nonlinear.expression.nodes import (
    RESERVED_NAMES,
    Node,
    Parameter,
    children,
)


def check_uses(root: Node, parameters: tuple[str, ...], length: int) -> None:
    """Refuse a tree that leaves a declared parameter unused or depends on no parameter.

    ``length`` is the caller's text length, quoted as the columns concerned.
    """
    used: set[str] = set()
    stack = [root]
    while stack:
        node = stack.pop()
        if isinstance(node, Parameter):
            used.add(node.name)
        stack.extend(children(node))
    unused = [name for name in parameters if name not in used]
    if unused:
        names = ", ".join(repr(name) for name in unused)
        raise ExpressionError(
            f"The expression (columns 1-{length}) never uses the declared parameter(s) {names}.",
            fix="Remove unused names from the parameter list or use them in the expression.",
            column=1)
    if not used:
        raise ExpressionError(
            f"The expression (columns 1-{length}) depends on no parameter: nothing to fit.",
            fix="Declare the parameters to fit and use them, e.g. b1*exp(-b2*x).", column=1)


def check_parameter_names(parameters: Sequence[str]) -> tuple[str, ...]:
    """Validate the caller's parameter list and return it as a tuple.

    Raises
    ------
    ExpressionError
        (field ``model.parameters``) a name that is not a plain ASCII
        identifier, is a Python keyword, is reserved (``x``, ``pi``, a
        function) or is repeated.
    """
    if isinstance(parameters, str | bytes):
        raise ExpressionError("The parameter names must be a list of names, not one text.",
                              field="model.parameters", fix='Send e.g. ["b1", "b2"].')
    try:
        names = tuple(parameters)
    except TypeError:
        raise ExpressionError("The parameter names must be a list of names.",
                              field="model.parameters", fix='Send e.g. ["b1", "b2"].') from None
    seen: set[str] = set()
    for i, name in enumerate(names):
        field = f"model.parameters[{i}]"
        if not (isinstance(name, str) and name.isascii() and name.isidentifier()) \
                or iskeyword(name):
            raise ExpressionError(f"Parameter name {name!r} is not a plain identifier.",
                                  field=field, fix="Use letters, digits and _, starting with "
                                  "a letter, e.g. b1 or rate.")
        if name in RESERVED_NAMES:
            raise ExpressionError(f"Parameter name {name!r} is reserved (x, pi and the "
                                  "function names).", field=field, fix="Choose another name.")
        if name in seen:
            raise ExpressionError(f"Parameter name {name!r} is declared twice.", field=field,
                                  fix="Declare each parameter once.")
        seen.add(name)
    return names
