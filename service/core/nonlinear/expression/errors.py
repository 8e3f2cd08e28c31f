"""The one error type of the expression compiler.

Every refusal says what is wrong and where (1-based ``column`` of the
caller's text, also written into the message) and, in ``fix``, what to send
instead.
"""

from __future__ import annotations

from service.core.errors import SpecError

FIELD = "model.expression"
FUNCTIONS_HINT = ("Use one of: exp, log, log10, sqrt, sin, cos, tan, arctan, abs; "
                  "write powers as x^2.")
GRAMMAR_HINT = ("Write an arithmetic expression in x and the declared parameters: numbers, "
                "+ - * /, ^ for powers (x^2), parentheses and the one-argument functions "
                "exp, log, log10, sqrt, sin, cos, tan, arctan, abs.")


class ExpressionError(SpecError):
    """The model expression (or its parameter list) cannot be compiled.

    Parameters
    ----------
    message : str
        What is wrong, including "at column N" when a position is known.
    field : str
        ``"model.expression"`` unless the parameter list itself is at fault
        (``"model.parameters"``).
    fix : str
        What the caller should send instead.
    code : str or None
        Defaults to ``"invalid_expression"``.
    column : int or None
        1-based position in the caller's text.
    """

    code = "invalid_expression"

    def __init__(self, message: str, *, field: str | None = FIELD, fix: str = "",
                 code: str | None = None, column: int | None = None) -> None:
        super().__init__(message, field=field, fix=fix, code=code)
        self.column = column

    def __reduce__(self):
        return (_rebuild, (type(self), self.message, self.field, self.fix, self.code,
                           self.column))


def _rebuild(cls, message, field, fix, code, column):
    return cls(message, field=field, fix=fix, code=code, column=column)


def refuse(what: str, column: int, fix: str = GRAMMAR_HINT) -> ExpressionError:
    """Build the refusal for ``what`` found at 1-based ``column`` of the expression."""
    return ExpressionError(f"{what} at column {column}.", fix=fix, column=column)
