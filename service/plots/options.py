"""What a figure should show: panel names, sizes and their limits.

The wire schema (``schemas/plots.py``) validates requests against the same
names and limits; ``tests/plots/test_plot_schema.py`` keeps the two in step.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from service.core.errors import SpecError
from service.plots import layout

PANELS = ("fit", "studentized_residuals", "influence", "spread", "half_normal", "selection")
PANEL_TITLES = {
    "fit": "Data, fitted curve and bands",
    "studentized_residuals": "Studentized residuals along x",
    "influence": "Influence map",
    "spread": "Spread along x",
    "half_normal": "Half-normal plot",
    "selection": "Degree selection",
}
COMPARISON_TITLE = "Candidate models"  # the selection panel of a comparison
X_SCALES = ("linear", "log")
FORMATS = ("png", "svg")
MEDIA_TYPES = {"png": "image/png", "svg": "image/svg+xml"}

MIN_PIXELS, MAX_PIXELS = 200, 4000        # width and height, each
MAX_AREA = 8_000_000                      # width * height (a PNG of ~32 MB in memory)
MIN_DPI, MAX_DPI = 50, 300
MAX_POINTS = {"png": 200_000, "svg": 20_000}  # data points drawn; SVG writes one element each
MAX_LABEL = 200
BASE_SIZE = (800, 600)                    # px: the least a figure grows from when no size is given


@dataclass(frozen=True, slots=True)
class PlotOptions:
    """A figure request.

    Parameters
    ----------
    panels : tuple of str
        Panels from :data:`PANELS`; placed by :func:`service.plots.layout.rows`.
    width, height : int or None
        Size in pixels (for SVG: the ``width``/``height`` attributes, in px). None lets
        the figure grow to what its panels need (at least 800 x 600).
    dpi : int
        Pixels per inch: the scale of text and lines relative to the size.
    format : str
        ``"png"`` or ``"svg"``.
    simultaneous : bool
        Also draw the simultaneous (whole-curve) band on the ``fit`` panel.
    title, x_label, y_label : str or None
        Plain labels; default ``x`` and ``y``.
    x_scale : str
        ``"linear"`` or ``"log"``: the x axis of the panels drawn along x (dose-response
        curves are read on log concentration); log draws the x > 0 only: points at x <= 0
        (zero-dose blanks) are fitted but not drawn, and the figure says how many
        (:func:`check_log_x` refuses a log axis with nothing positive to draw).

    Raises
    ------
    SpecError
        For an unknown panel, format, size or dpi, and when a given width (or height)
        leaves some panel less than the minimum plotting area (:mod:`~service.plots.layout`).
        The height check here assumes a one-line legend; the figure repeats it with the
        legend it actually draws.
    """

    panels: tuple[str, ...] = ("fit",)
    width: int | None = None
    height: int | None = None
    dpi: int = 100
    format: str = "png"
    simultaneous: bool = False
    title: str | None = None
    x_label: str | None = None
    y_label: str | None = None
    x_scale: str = "linear"

    def __post_init__(self) -> None:
        if self.x_scale not in X_SCALES:
            raise SpecError(f"Unknown x_scale {self.x_scale!r}.", field="plot.x_scale",
                            fix="Use linear or log.")
        unknown = [p for p in self.panels if p not in PANELS]
        if unknown or not self.panels or len(set(self.panels)) != len(self.panels):
            raise SpecError(f"Unknown or repeated panels: {list(self.panels)}.",
                            field="plot.panels",
                            fix=f"Give distinct names from {', '.join(PANELS)}.")
        if self.format not in FORMATS:
            raise SpecError(f"Unknown format {self.format!r}.", field="plot.format",
                            fix="Use png or svg.")
        for name in ("width", "height"):
            value = getattr(self, name)
            if value is not None and not MIN_PIXELS <= value <= MAX_PIXELS:
                raise SpecError(f"{name} {value} is out of range.", field=f"plot.{name}",
                                fix=f"Use {MIN_PIXELS} to {MAX_PIXELS} pixels.")
        if self.width is not None and self.height is not None and (
                self.width * self.height > MAX_AREA):
            raise SpecError(f"width x height = {self.width * self.height} pixels is over the "
                            f"limit of {MAX_AREA}.", field="plot.width",
                            fix="Make the figure smaller.")
        if not MIN_DPI <= self.dpi <= MAX_DPI:
            raise SpecError(f"dpi {self.dpi} is out of range.", field="plot.dpi",
                            fix=f"Use {MIN_DPI} to {MAX_DPI}.")
        rows, titled = layout.rows(self.panels), bool(self.title)
        if self.width is not None:
            layout.check_size("width", self.width, layout.least_width(rows), self.dpi, rows)
        if self.height is not None:
            layout.check_size("height", self.height,
                              layout.least_height(rows, titled, layout.LEGEND_LINE),
                              self.dpi, rows)

    def pixel_width(self) -> int:
        """The figure width: as asked, or grown to the panels (at least 800 px)."""
        if self.width is not None:
            return self.width
        grid = layout.rows(self.panels)
        limit = MAX_PIXELS if self.height is None else min(MAX_PIXELS, MAX_AREA // self.height)
        return self._grown("width", layout.least_width(grid),
                           layout.width_for(grid, layout.ROOMY_WIDTH), BASE_SIZE[0], limit)

    def pixel_height(self, width: int, legend: float) -> int:
        """The figure height for a figure ``width`` px wide whose legend strip is ``legend``
        inches high: as asked (refused when too low), or grown (at least 600 px)."""
        grid, titled = layout.rows(self.panels), bool(self.title)
        least = layout.least_height(grid, titled, legend)
        if self.height is not None:
            layout.check_size("height", self.height, least, self.dpi, grid)
            return self.height
        return self._grown("height", least, layout.roomy_height(grid, titled, legend),
                           BASE_SIZE[1], min(MAX_PIXELS, MAX_AREA // width))

    def _grown(self, name: str, least: float, roomy: float, base: int, limit: int) -> int:
        need = math.ceil(least * self.dpi - 1e-9)
        if need > limit:
            raise SpecError(f"At {self.dpi} dpi the panels {', '.join(self.panels)} need a "
                            f"figure {need} px in {name}, over the limit of {limit}.",
                            field="plot.dpi", fix="Lower dpi, or ask for fewer panels.")
        return min(max(base, math.ceil(roomy * self.dpi - 1e-9)), limit)

    @property
    def log_x(self) -> bool:
        """True when the x axis is logarithmic."""
        return self.x_scale == "log"

    @property
    def media_type(self) -> str:
        """The response media type for :attr:`format`."""
        return MEDIA_TYPES[self.format]

    @property
    def needs_diagnostics(self) -> bool:
        """True when a residual panel is asked for."""
        return any(p not in ("fit", "selection") for p in self.panels)


def check_log_x(x) -> None:
    """Refuse a log x axis with no positive x to draw (naming ``plot.x_scale``); x <= 0 are
    fitted but not drawn on that axis (:func:`service.plots.data.not_drawn` counts them)."""
    values = np.asarray(x, dtype=float)
    finite = values[np.isfinite(values)]
    if finite.size and not np.any(finite > 0):
        raise SpecError(f"None of the {finite.size} x is positive: nothing can be drawn on a log "
                        "x axis.", field="plot.x_scale", fix="Use x_scale linear (every x "
                        "is fitted either way; a log axis draws only the x > 0).")
