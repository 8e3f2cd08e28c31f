"""Text to tree: Python's own parser, then an allow-list walk of its syntax tree.

Only these Python nodes are accepted: ``Expression``, ``BinOp`` (``+ - * / **``),
``UnaryOp`` (``-`` and ``+``), ``Call`` of a bare allowed function name with one
positional argument, ``Name`` and int/float ``Constant``. Everything else is
refused with its column; nothing is ever evaluated. Unary plus is dropped.
"""

from __future__ import annotations

import ast
import math

from service.core.nonlinear.expression.errors import FUNCTIONS_HINT, refuse
from service.core.nonlinear.expression.names import check_uses
from service.core.nonlinear.expression.nodes import (
    FUNCTIONS,
    PI,
    VARIABLE,
    Binary,
    Call,
    Negate,
    Node,
    Number,
    Parameter,
    Pi,
    Variable,
)
from service.core.nonlinear.expression.scan import (
    MAX_DEPTH,
    MAX_LITERAL,
    MAX_NODES,
    Source,
    scan,
)

_OPERATORS = {ast.Add: "+", ast.Sub: "-", ast.Mult: "*", ast.Div: "/", ast.Pow: "^"}
_REFUSED_OPERATORS = {ast.FloorDiv: "//", ast.Mod: "%", ast.MatMult: "@", ast.LShift: "<<",
                      ast.RShift: ">>", ast.BitOr: "|", ast.BitAnd: "&", ast.BitXor: "^"}
_CONSTRUCTS = {
    ast.Attribute: "attribute access ('.')", ast.Subscript: "indexing ('[...]')",
    ast.Lambda: "lambda", ast.ListComp: "a comprehension", ast.SetComp: "a comprehension",
    ast.DictComp: "a comprehension", ast.GeneratorExp: "a comprehension",
    ast.Compare: "a comparison", ast.BoolOp: "'and'/'or'", ast.IfExp: "'if ... else'",
    ast.JoinedStr: "an f-string", ast.FormattedValue: "an f-string", ast.NamedExpr: "':='",
    ast.Starred: "'*' unpacking", ast.Tuple: "a comma outside a function call",
    ast.List: "a list", ast.Set: "a set", ast.Dict: "a dictionary", ast.Await: "'await'",
    ast.Yield: "'yield'", ast.YieldFrom: "'yield'", ast.Slice: "a slice",
}


def parse_expression(text: object, parameters: tuple[str, ...]) -> Node:
    """Parse ``text`` into a tree over ``x``, ``pi`` and the declared ``parameters``.

    Parameters
    ----------
    text : object
        The caller's expression (checked by :func:`~.scan.scan` first).
    parameters : tuple of str
        Declared parameter names, already validated; their order gives
        :attr:`Parameter.index`.

    Returns
    -------
    Node
        The tree; every declared parameter occurs in it.

    Raises
    ------
    ExpressionError
        On any syntax error, refused construct, unknown or unused name, or limit.
    """
    source = scan(text)
    try:
        tree = ast.parse(source.python, mode="eval")
    except SyntaxError as error:
        index = (error.offset or len(source.python) + 1) - 1
        column = source.column(index)
        raise refuse(f"Syntax error ({error.msg})", column) from None
    except (ValueError, MemoryError, RecursionError):
        raise refuse("The expression is too complex to parse", 1) from None
    _check_size(tree.body, source)
    root = _Converter(source, parameters).convert(tree.body)
    check_uses(root, parameters, len(text))
    return root


def _check_size(body: ast.expr, source: Source) -> None:
    """Refuse more than MAX_NODES expression nodes or more than MAX_DEPTH levels (no recursion)."""
    count = 0
    stack: list[tuple[ast.AST, int]] = [(body, 1)]
    while stack:
        node, depth = stack.pop()
        if isinstance(node, ast.expr):
            count += 1
            column = source.column(node.col_offset)
            if depth > MAX_DEPTH:
                raise refuse(f"The expression is nested more than {MAX_DEPTH} levels deep "
                             "(long chains of operators count as nesting)", column,
                             fix="Simplify the expression, or group long sums with "
                                 "parentheses, e.g. (a + b) + (c + d).")
            if count > MAX_NODES:
                raise refuse(f"The expression has more than {MAX_NODES} numbers, names, "
                             "operations and calls; the excess starts", column,
                             fix="Simplify the expression.")
            depth += 1
        children = list(ast.iter_child_nodes(node))
        stack.extend((child, depth) for child in reversed(children))  # left to right


class _Converter:
    """Allow-list walk from Python's tree to :mod:`.nodes` (depth already bounded)."""

    def __init__(self, source: Source, parameters: tuple[str, ...]) -> None:
        self.source = source
        self.index = {name: i for i, name in enumerate(parameters)}
        self.parameters = parameters

    def column(self, node: ast.AST) -> int:
        return self.source.column(getattr(node, "col_offset", 0))

    def convert(self, node: ast.AST) -> Node:
        if isinstance(node, ast.BinOp):
            return self.binary(node)
        if isinstance(node, ast.UnaryOp):
            return self.unary(node)
        if isinstance(node, ast.Call):
            return self.call(node)
        if isinstance(node, ast.Name):
            return self.name(node)
        if isinstance(node, ast.Constant):
            return self.number(node)
        what = _CONSTRUCTS.get(type(node), f"this construct ({type(node).__name__})")
        column = (self.operator_column(node.left, node.comparators[0])
                  if isinstance(node, ast.Compare) else self.column(node))
        raise refuse(f"{what[0].upper()}{what[1:]} is not allowed", column)

    def binary(self, node: ast.BinOp) -> Node:
        op = _OPERATORS.get(type(node.op))
        if op is None:
            symbol = _REFUSED_OPERATORS.get(type(node.op), "?")
            raise refuse(f"The operator {symbol!r} is not allowed",
                         self.operator_column(node.left, node.right),
                         fix="Use + - * / and ^ for powers (x^2).")
        left = self.convert(node.left)
        return Binary(op, left, self.convert(node.right), self.column(node))

    def unary(self, node: ast.UnaryOp) -> Node:
        if isinstance(node.op, ast.UAdd):
            return self.convert(node.operand)
        if isinstance(node.op, ast.USub):
            return Negate(self.convert(node.operand), self.column(node))
        symbol = "not" if isinstance(node.op, ast.Not) else "~"
        raise refuse(f"The operator {symbol!r} is not allowed", self.column(node),
                     fix="Use + - * / and ^ for powers (x^2).")

    def call(self, node: ast.Call) -> Node:
        func = node.func
        if not isinstance(func, ast.Name):
            raise refuse("Only the functions exp, log, log10, sqrt, sin, cos, tan, arctan "
                         "and abs may be called", self.column(node), fix=FUNCTIONS_HINT)
        if func.id not in FUNCTIONS:
            known = func.id in self.index or func.id in (VARIABLE, PI)
            what = (f"{func.id!r} is not a function" if known
                    else f"Unknown function {func.id!r}")
            fix = FUNCTIONS_HINT + (" Write products with *, e.g. b1*(x + 1)." if known else "")
            raise refuse(what, self.column(func), fix=fix)
        if node.keywords:
            raise refuse(f"{func.id}() takes no keyword arguments", self.column(node.keywords[0]),
                         fix=f"Write {func.id}(expression), e.g. {func.id}(x).")
        if len(node.args) != 1:
            where = node.args[1] if len(node.args) > 1 else node
            raise refuse(f"{func.id}() takes exactly one argument, got {len(node.args)}",
                         self.column(where), fix=f"Write {func.id}(expression); for a base-10 "
                         "logarithm use log10(x).")
        argument = node.args[0]
        if isinstance(argument, ast.Starred):
            raise refuse("'*' unpacking is not allowed", self.column(argument))
        return Call(func.id, self.convert(argument), self.column(func))

    def name(self, node: ast.Name) -> Node:
        column = self.column(node)
        if node.id == VARIABLE:
            return Variable(column)
        if node.id == PI:
            return Pi(column)
        if node.id in self.index:
            return Parameter(node.id, self.index[node.id], column)
        if node.id in FUNCTIONS:
            raise refuse(f"The function {node.id!r} is not called (write {node.id}(...))",
                         column, fix=FUNCTIONS_HINT)
        declared = ", ".join(self.parameters) or "none"
        raise refuse(f"Unknown name {node.id!r} (declared parameters: {declared})", column,
                     fix="Use only x, pi, the allowed functions and the declared parameters, "
                         "or declare the missing parameter.")

    def number(self, node: ast.Constant) -> Node:
        value = node.value
        column = self.column(node)
        if type(value) not in (int, float):
            raise refuse(f"{_describe_constant(value)} is not allowed", column,
                         fix="Write numbers as plain decimals, e.g. 2, 0.5 or 1e-3.")
        try:
            number = float(value)
        except OverflowError:
            number = math.inf
        if not math.isfinite(number) or number > MAX_LITERAL:
            raise refuse(f"The number is larger than {MAX_LITERAL:g}", column,
                         fix=f"Write numbers of at most {MAX_LITERAL:g} in size.")
        return Number(number, column)

    def operator_column(self, left: ast.expr, right: ast.expr) -> int:
        """Column of the first character after ``left`` that is not a space or ')'."""
        python = self.source.python
        index = left.end_col_offset or 0
        while index < right.col_offset and python[index] in " )":
            index += 1
        return self.source.column(index)


def _describe_constant(value: object) -> str:
    if isinstance(value, bool):
        return f"The literal {value}"
    if isinstance(value, complex):
        return "A complex number"
    if isinstance(value, str | bytes):
        return "A text literal"
    return f"The literal {value!r}"
