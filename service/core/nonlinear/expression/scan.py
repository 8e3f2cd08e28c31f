"""Limits, and the character scan that runs before Python's parser sees the text.

The scan refuses what could hurt or confuse the parser (too long, non-ASCII,
control characters, comments, quotes, a number glued to a name as in ``2x``,
brackets or sign runs nested beyond :data:`MAX_NESTING`)
and rewrites the text for :func:`ast.parse`: ``^`` becomes ``**`` (Python
gives ``^`` a lower precedence than ``+``) and tabs and line breaks become
spaces. It keeps, for every character of the rewritten text, the 1-based
column it came from, so that positions reported by the parser point into the
caller's own text.
"""

from __future__ import annotations

import re
from typing import NamedTuple

from service.core.nonlinear.expression.errors import ExpressionError, refuse

MAX_LENGTH = 2000      # characters of expression text
MAX_NESTING = 64       # open brackets at once, or signs in a row
MAX_NODES = 500        # numbers, names, operations and calls in the tree
MAX_DEPTH = 64         # levels of the tree
MAX_LITERAL = 1e300    # largest |number| written in the text
MAX_EXPONENT = 1e3     # largest |constant exponent|

_OPENING = "([{"
_CLOSING = ")]}"
_SPACES = "\t\n\r"
# a number literal (not part of a name; atomic: no backtracking) followed by a letter or _
_NUMBER_BEFORE_NAME = re.compile(
    r"(?<![\w.])(?>(?:\d[\d_]*\.?[\d_]*|\.\d[\d_]*)(?:[eE][+-]?\d[\d_]*)?)(?=[A-Za-z_])")
_PLAIN_TEXT_HINT = "Send the expression as plain ASCII text, e.g. b1*exp(-b2*x)."


class Source(NamedTuple):
    """The text handed to :func:`ast.parse` and where each of its characters came from.

    ``columns[i]`` is the 1-based column, in the caller's text, of character
    ``i`` of ``python``; one extra entry stands for the end of the text.
    """

    python: str
    columns: tuple[int, ...]

    def column(self, index: int) -> int:
        """1-based caller column of 0-based ``index`` into ``python`` (clamped)."""
        return self.columns[min(max(index, 0), len(self.columns) - 1)]


def scan(text: object) -> Source:
    """Check the raw text against the limits and rewrite it for Python's parser.

    Parameters
    ----------
    text : object
        The caller's expression; anything but a non-blank ``str`` is refused.

    Returns
    -------
    Source
        Rewritten text (``^`` as ``**``, whitespace as spaces) and its column map.

    Raises
    ------
    ExpressionError
        Not text, blank, longer than :data:`MAX_LENGTH`, non-ASCII, a control
        character, or brackets or signs nested deeper than :data:`MAX_NESTING`.
    """
    if not isinstance(text, str):
        raise ExpressionError(f"The expression must be text, not {type(text).__name__} "
                              "(at column 1).", fix=_PLAIN_TEXT_HINT, column=1)
    if len(text) > MAX_LENGTH:
        raise refuse(f"The expression is {len(text)} characters long, more than the "
                     f"{MAX_LENGTH} allowed; the excess starts", MAX_LENGTH + 1,
                     fix=f"Send at most {MAX_LENGTH} characters.")
    if not text.strip():
        raise refuse("The expression is empty", 1,
                     fix="Send the model equation, e.g. b1*(1 - exp(-b2*x)).")
    _check_characters(text)
    _check_nesting(text)
    python: list[str] = []
    columns: list[int] = []
    for position, char in enumerate(text, start=1):
        if char == "^":
            python.append("**")
            columns.extend((position, position))
            continue
        python.append(" " if char in _SPACES else char)
        columns.append(position)
    columns.append(len(text) + 1)
    return Source("".join(python), tuple(columns))


def _check_characters(text: str) -> None:
    """Refuse non-ASCII, control characters, comments, quotes and numbers run into names.

    The last two would make Python's parser warn (escape sequences, "invalid
    decimal literal") before the allow-list walk could refuse them.
    """
    for position, char in enumerate(text, start=1):
        code = ord(char)
        if code > 127:
            raise refuse(f"The character {char!r} (U+{code:04X}) is not plain ASCII", position,
                         fix=_PLAIN_TEXT_HINT + " Write powers as x^2 and products with *.")
        if (code < 32 and char not in _SPACES) or code == 127:
            raise refuse(f"The control character U+{code:04X} is not allowed", position,
                         fix=_PLAIN_TEXT_HINT)
        if char == "#":  # a comment would swallow the rest of a line joined by the rewrite
            raise refuse("Comments ('#') are not allowed", position,
                         fix="Send the expression alone, without comments.")
        if char in "'\"":
            raise refuse("Quoted text is not allowed", position,
                         fix="Write names without quotes, e.g. b1*x.")
    glued = _NUMBER_BEFORE_NAME.search(text)
    if glued:
        position = glued.end() + 1
        if text[glued.end()] in "jJ":
            raise refuse("Complex numbers are not allowed", position,
                         fix="Use real numbers only.")
        raise refuse(f"The number {glued.group()!r} runs straight into a name", position,
                     fix="Write * between a number and a name, e.g. 2*x.")


def _check_nesting(text: str) -> None:
    depth = 0
    signs = 0
    for position, char in enumerate(text, start=1):
        if char in _OPENING:
            depth += 1
            if depth > MAX_NESTING:
                raise refuse(f"Brackets are nested more than {MAX_NESTING} deep", position,
                             fix="Simplify the expression or remove redundant parentheses.")
        elif char in _CLOSING:
            depth -= 1
        if char in "+-":
            signs += 1
            if signs > MAX_NESTING:
                raise refuse(f"More than {MAX_NESTING} signs in a row", position,
                             fix="Write each sign once, e.g. -b1 rather than ---b1.")
        elif not char.isspace():
            signs = 0
