"""What a figure should show: panel names, sizes and their limits.

The wire schema (``schemas/plots.py``) validates requests against the same
names and limits; ``tests/plots/test_plot_schema.py`` keeps the two in step.
"""

from __future__ import annotations

from dataclasses import dataclass

from service.core.errors import SpecError
from service.plots import layout

PANELS = ("fit", "residuals", "normal_quantiles", "scale_location", "leverage", "selection")
PANEL_TITLES = {
    "fit": "Data, fitted curve and bands",
    "residuals": "Residuals against fitted values",
    "normal_quantiles": "Normal quantiles of studentized residuals",
    "scale_location": "Spread against fitted values",
    "leverage": "Residuals against leverage",
    "selection": "Selection criteria by degree",
}
FORMATS = ("png", "svg")
MEDIA_TYPES = {"png": "image/png", "svg": "image/svg+xml"}

MIN_PIXELS, MAX_PIXELS = 200, 4000        # width and height, each
MAX_AREA = 8_000_000                      # width * height (a PNG of ~32 MB in memory)
MIN_DPI, MAX_DPI = 50, 300
MAX_POINTS = {"png": 200_000, "svg": 20_000}  # data points drawn; SVG writes one element each
MAX_LABEL = 200


@dataclass(frozen=True, slots=True)
class PlotOptions:
    """A figure request.

    Parameters
    ----------
    panels : tuple of str
        Panels from :data:`PANELS`, drawn in this order (row by row).
    width, height : int
        Size in pixels (for SVG: the ``width``/``height`` attributes, in px).
    dpi : int
        Pixels per inch: the scale of text and lines relative to the size.
    format : str
        ``"png"`` or ``"svg"``.
    simultaneous : bool
        Also draw the simultaneous (whole-curve) band on the ``fit`` panel.
    title, x_label, y_label : str or None
        Plain labels; default ``x`` and ``y``.
    """

    panels: tuple[str, ...] = ("fit",)
    width: int = 800
    height: int = 600
    dpi: int = 100
    format: str = "png"
    simultaneous: bool = False
    title: str | None = None
    x_label: str | None = None
    y_label: str | None = None

    def __post_init__(self) -> None:
        unknown = [p for p in self.panels if p not in PANELS]
        if unknown or not self.panels or len(set(self.panels)) != len(self.panels):
            raise SpecError(f"Unknown or repeated panels: {list(self.panels)}.",
                            field="plot.panels",
                            fix=f"Give distinct names from {', '.join(PANELS)}.")
        if self.format not in FORMATS:
            raise SpecError(f"Unknown format {self.format!r}.", field="plot.format",
                            fix="Use png or svg.")
        for name in ("width", "height"):
            if not MIN_PIXELS <= getattr(self, name) <= MAX_PIXELS:
                raise SpecError(f"{name} {getattr(self, name)} is out of range.",
                                field=f"plot.{name}",
                                fix=f"Use {MIN_PIXELS} to {MAX_PIXELS} pixels.")
        if self.width * self.height > MAX_AREA:
            raise SpecError(f"width x height = {self.width * self.height} pixels is over the "
                            f"limit of {MAX_AREA}.", field="plot.width",
                            fix="Make the figure smaller.")
        if not MIN_DPI <= self.dpi <= MAX_DPI:
            raise SpecError(f"dpi {self.dpi} is out of range.", field="plot.dpi",
                            fix=f"Use {MIN_DPI} to {MAX_DPI}.")
        w, h = layout.panel_size(len(self.panels), self.width / self.dpi,
                                 self.height / self.dpi, title=bool(self.title),
                                 second_axis="selection" in self.panels)
        for name, size, least in (("width", w, layout.MIN_PANEL_WIDTH),
                                  ("height", h, layout.MIN_PANEL_HEIGHT)):
            if size < least:
                raise SpecError(
                    f"At {self.dpi} dpi, {len(self.panels)} panel(s) leave only {size:.2f} "
                    f"inches of plot {name} each (at least {least} is needed for the labels).",
                    field=f"plot.{name}",
                    fix=f"Increase {name}, lower dpi, or ask for fewer panels.")

    @property
    def media_type(self) -> str:
        """The response media type for :attr:`format`."""
        return MEDIA_TYPES[self.format]

    @property
    def needs_diagnostics(self) -> bool:
        """True when a residual panel is asked for."""
        return any(p in self.panels for p in PANELS[1:5])
