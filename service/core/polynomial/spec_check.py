"""Checking a polynomial model specification: transforms, degrees and the selection rule."""

from __future__ import annotations

from service.core.data.inputs import check_options
from service.core.errors import SpecError
from service.core.spec import HARD_MAX_DEGREE, SELECT_METHODS, TRANSFORMS, FitOptions, ModelSpec

DEFAULT_MAX_DEGREE = 3  # candidates when neither degree nor max_degree is given


def _spec_error(message: str, field: str, fix: str) -> SpecError:
    return SpecError(message, field=field, fix=fix)


def check_spec(model: ModelSpec, options: FitOptions) -> tuple[int, int, bool]:
    """Validate a polynomial model and the options; return ``(min_degree, max_degree, selects)``.

    The family name itself is checked by the registry (:mod:`service.core.families`).

    Raises
    ------
    SpecError
        An unknown name, an out-of-range number, or options that contradict each other.
    """
    if model.transform_x not in TRANSFORMS:
        raise _spec_error(f"Unknown transform_x {model.transform_x!r}.", "model.transform_x",
                          f"Use one of {', '.join(TRANSFORMS)}.")
    if model.transform_y not in TRANSFORMS:
        raise _spec_error(f"Unknown transform_y {model.transform_y!r}.", "model.transform_y",
                          f"Use one of {', '.join(TRANSFORMS)}.")
    check_options(options)
    lowest = 0 if model.intercept else 1
    top = max(1, min(int(options.max_degree), HARD_MAX_DEGREE))  # the caller's limit
    if model.degree is not None:
        if model.max_degree is not None:
            raise _spec_error("Both degree and max_degree are given.", "model.max_degree",
                              "Give degree for a fixed model, or max_degree (and select) to "
                              "choose the degree, not both.")
        d = _int(model.degree, "model.degree")
        if not lowest <= d <= top:
            extra = "." if model.intercept else " (degree 0 needs the intercept)."
            raise _spec_error(f"degree = {d} is outside {lowest}..{top}.",
                              "model.degree", f"Use a degree from {lowest} to {top}{extra}")
        return d, d, False
    if model.select not in SELECT_METHODS:
        raise _spec_error(f"Unknown select method {model.select!r}.", "model.select",
                          f"Use one of {', '.join(SELECT_METHODS)}.")
    if not 0.0 < float(model.alpha) < 1.0:
        raise _spec_error(f"alpha = {model.alpha!r} is not between 0 and 1.", "model.alpha",
                          "Use a significance level such as 0.05.")
    dmin = _int(model.min_degree, "model.min_degree")
    dmax = DEFAULT_MAX_DEGREE if model.max_degree is None else _int(model.max_degree,
                                                                     "model.max_degree")
    if not lowest <= dmin <= top:
        raise _spec_error(f"min_degree = {dmin} is outside {lowest}..{top}.",
                          "model.min_degree", f"Use a min_degree from {lowest} to {top}.")
    if not dmin <= dmax <= top:
        raise _spec_error(f"max_degree = {dmax} is outside {dmin}..{top}.",
                          "model.max_degree", f"Use a max_degree from min_degree ({dmin}) to "
                          f"{top}.")
    return dmin, dmax, True


def _int(value, field: str) -> int:
    if isinstance(value, bool) or int(value) != value:
        raise _spec_error(f"{field} = {value!r} is not a whole number.", field,
                          "Use a whole number.")
    return int(value)
