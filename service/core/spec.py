"""What the caller asks the core to do: frozen, validated option objects.

These are plain value objects. The web layer builds them from the loaded
request (the marshmallow schemas produce dicts whose keys match these
fields); library callers build them directly.
"""

from __future__ import annotations

from dataclasses import dataclass, field

SELECT_METHODS = ("sequential_f", "aic", "aicc", "bic", "press", "adj_r2")
TRANSFORMS = ("none", "log", "log10", "sqrt", "reciprocal")
MISSING_POLICIES = ("error", "drop")
WEIGHTINGS = ("relative", "known_sd")
GRID_SPACINGS = ("linear", "log")
SECTIONS = ("coefficients", "anova", "statistics", "selection", "diagnostics", "grid",
            "fitted_model")
HARD_MAX_DEGREE = 12  # absolute ceiling of the core; the service limit may be lower
# Largest count of replicate readings (m): the largest whole number a double holds exactly;
# beyond it sigma²/m is below rounding of any band anyway.
MAX_REPLICATES = 2**53 - 1


@dataclass(frozen=True, slots=True)
class ModelSpec:
    """A model request: the family and its options.

    Parameters
    ----------
    family : str
        A family of :data:`service.core.families.FAMILIES` (``"polynomial"``,
        ``"expression"``, or a built-in nonlinear family such as ``"logistic4"``).
        The polynomial options follow; the nonlinear ones (``expression``,
        ``parameters``, ``lower``, ``upper``, ``fixed``, ``scale``) come last.
    degree : int or None
        Fixed degree. Mutually exclusive with ``max_degree``.
    max_degree : int or None
        Select the degree from ``min_degree .. max_degree`` by ``select``.
    select : str
        One of :data:`SELECT_METHODS`.
    alpha : float
        Significance level for ``sequential_f``.
    intercept : bool
        Include the constant term. Without it sums of squares are uncentred.
    transform_x, transform_y : str
        One of :data:`TRANSFORMS`, applied before fitting.
    min_degree : int
        Smallest candidate degree when selecting (default 1).
    expression : str or None
        The model equation in ``x`` and named parameters (``"expression"`` family).
    parameters : tuple of (name, start value) pairs, or None
        The parameters, in order, with their start values. Built-in families
        choose their own starts; given values replace the automatic ones.
    lower, upper : tuple of (name, bound) pairs, or None
        Optional bounds on some parameters.
    fixed : tuple of (name, value) pairs, or None
        Built-in families: parameters held at a value (not fitted).
    scale : str or None
        Built-in families with a choice of x scale (``"log"`` or ``"linear"``);
        None takes the family's default.
    """

    family: str = "polynomial"
    degree: int | None = None
    max_degree: int | None = None
    select: str = "sequential_f"
    alpha: float = 0.05
    intercept: bool = True
    transform_x: str = "none"
    transform_y: str = "none"
    min_degree: int = 1
    expression: str | None = None
    parameters: tuple[tuple[str, float], ...] | None = None
    lower: tuple[tuple[str, float], ...] | None = None
    upper: tuple[tuple[str, float], ...] | None = None
    fixed: tuple[tuple[str, float], ...] | None = None
    scale: str | None = None

    @property
    def selects(self) -> bool:
        """True when the degree is chosen from candidates rather than fixed."""
        return self.degree is None


@dataclass(frozen=True, slots=True)
class GridSpec:
    """Where to evaluate the fitted curve and its bands.

    Exactly one form is used: explicit ``x``; or ``start``/``stop``/``step``;
    or ``count`` points over the data range (the default, 200).
    ``start``/``stop`` without ``step`` use ``count`` points between them.
    ``spacing`` spaces a ``count`` grid: ``"linear"`` (equal steps), ``"log"``
    (equal ratios), or None: log for a count over the data range of a curve on log
    x, linear otherwise (:func:`service.core.data.grid.resolved_spacing`).
    """

    count: int | None = 200
    start: float | None = None
    stop: float | None = None
    step: float | None = None
    x: tuple[float, ...] | None = None
    spacing: str | None = None


@dataclass(frozen=True, slots=True)
class FitOptions:
    """Everything about a fit except the data and the model.

    Parameters
    ----------
    level : float
        Confidence level for coefficient limits and bands, in (0, 1).
    missing : str
        ``"error"`` (default): a null/NaN pair is an error. ``"drop"``: such
        pairs are removed and their indices reported.
    grid : GridSpec or None
        None skips the grid.
    include : frozenset of str
        Sections of :data:`SECTIONS` to compute. Diagnostics are the costly one.
    max_grid_points : int
        Refuse grids larger than this (``SpecError``).
    weighting : str
        ``"relative"`` (default): weights are relative inverse variances and
        sigma is estimated from the residuals. ``"known_sd"``: weights are
        ``1/SD²`` of a known measurement error; sigma is not rescaled and a
        chi-square goodness-of-fit test is reported.
    max_degree : int
        Highest polynomial degree the caller allows (a server's configured limit; at most
        :data:`HARD_MAX_DEGREE`): degrees above it are refused, and messages name it.
    """

    level: float = 0.95
    missing: str = "error"
    grid: GridSpec | None = field(default_factory=GridSpec)
    include: frozenset[str] = frozenset(SECTIONS)
    max_grid_points: int = 100_000
    weighting: str = "relative"
    max_degree: int = HARD_MAX_DEGREE
