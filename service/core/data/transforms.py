"""Transforms of x and y applied before fitting, their domains and inverses.

Each transform is monotone on its domain, so a band computed on the fitting
scale maps to a band on the original scale by applying the inverse to its
limits (swapping them for the decreasing ``reciprocal``).
"""

from __future__ import annotations

import numpy as np

from service.core.errors import TransformError, also_at

# name -> (forward, inverse, domain test, domain in words, increasing?)
_FORWARD = {
    "none": lambda v: v,
    "log": np.log,
    "log10": np.log10,
    "sqrt": np.sqrt,
    "reciprocal": lambda v: 1.0 / v,
}
_INVERSE = {
    "none": lambda v: v,
    "log": np.exp,
    "log10": lambda v: np.power(10.0, v),
    "sqrt": lambda v: np.square(np.maximum(v, 0.0)),  # a square root is never below 0
    "reciprocal": lambda v: 1.0 / v,
}
_DOMAIN = {
    "none": (None, "any finite number"),
    "log": (lambda v: v > 0, "greater than 0"),
    "log10": (lambda v: v > 0, "greater than 0"),
    "sqrt": (lambda v: v >= 0, "0 or greater"),
    "reciprocal": (lambda v: v != 0, "different from 0"),
}


def is_increasing(name: str) -> bool:
    """True when the transform preserves order (all but ``reciprocal``)."""
    return name != "reciprocal"


def first_outside(name: str, values: np.ndarray) -> int | None:
    """Position of the first value outside the domain of transform ``name``, or None."""
    test = _DOMAIN[name][0]
    if test is None:
        return None
    ok = test(values)
    return None if np.all(ok) else int(np.flatnonzero(~ok)[0])


def domain_words(name: str) -> str:
    """The domain of transform ``name`` in words ("greater than 0", ...)."""
    return _DOMAIN[name][1]


def apply(name: str, values: np.ndarray, *, field: str,
          index: np.ndarray | None = None, stored: bool = False) -> np.ndarray:
    """Apply transform ``name`` to ``values`` after checking its domain.

    Parameters
    ----------
    name : str
        One of ``service.core.spec.TRANSFORMS``.
    values : ndarray
        Finite float values.
    field : str
        Request field the values came from (``"x"`` or ``"y"``), used in errors.
    index : ndarray of int, optional
        Original positions of ``values`` (after dropping), so an error names
        the caller's index.
    stored : bool
        The transform is a stored model's (predict, invert): the fix then says which
        values that model takes, not to choose another transform.

    Raises
    ------
    TransformError
        When a value lies outside the domain; names the first offending index.
    """
    if name == "none":
        return values
    pos = first_outside(name, values)
    if pos is not None:
        words = domain_words(name)
        outside = np.flatnonzero(~_DOMAIN[name][0](values))
        originals = index[outside] if index is not None else outside
        orig = int(originals[0])
        raise TransformError(
            f"{field}[{orig}] = {float(values[pos])!r} is outside the domain of the {name} "
            f"transform (values must be {words}).{also_at(originals)}",
            field=f"{field}[{orig}]",
            fix=(f"The stored model was fitted on the {name} of {field}: send only values "
                 f"that are {words}, or refit with another transform." if stored else
                 f"Remove or correct that value, or choose transform_{field} = \"none\" "
                 f"or another transform whose domain covers your data."))
    with np.errstate(all="ignore"):
        return _FORWARD[name](values)


def inverse(name: str, values: np.ndarray) -> np.ndarray:
    """Map values on the fitting scale back to the original scale (naive back-transform)."""
    if name == "none":
        return values
    with np.errstate(all="ignore"):
        return _INVERSE[name](values)
