"""Where panels go: a column of panels sharing x on top, then rows of up to three.

The x column holds ``fit`` and, directly under it on the same x axis,
``studentized_residuals``; every other panel follows in the order asked, up
to :data:`ROW_LENGTH` side by side in a row. One legend strip for the whole
figure sits above the panels (under the title), so no legend covers data.

Sizes are in inches: text sizes are in points, so margins in inches keep labels
clear of each other at every size and dpi. Every panel keeps at least
:data:`MIN_PANEL_WIDTH` x :data:`MIN_PANEL_HEIGHT` inches of plotting area;
the height left over is shared out by fixed weights (the fit panel gets the
most). Fixed margins are much cheaper than a layout engine (constrained
layout roughly doubles the render time).
"""

from __future__ import annotations

import math

from service.core.errors import SpecError

STACKED = ("fit", "studentized_residuals")  # top to bottom, one shared x axis
ROW_LENGTH = 3

# Inches. HEAD: panel title and its line of numbers; FOOT: tick labels and axis label;
# JOIN: the gap under the fit panel when the residual panel below shares its x axis.
PAD_TOP, FIGURE_TITLE, LEGEND_LINE, LEGEND_GAP = 0.08, 0.34, 0.22, 0.06
HEAD, FOOT, JOIN = 0.46, 0.5, 0.04
LEFT, RIGHT, COL_GAP, TWIN = 0.72, 0.25, 0.8, 0.62   # TWIN: the selection panel's right axis
LEGEND_LEFT = 0.12
MIN_PANEL_WIDTH, MIN_PANEL_HEIGHT = 1.7, 1.3
# The size a figure grows to when the caller gives none (never below 800 x 600 px).
ROOMY_WIDTH, ROOMY_HEIGHT = 2.4, {"fit": 3.2, "studentized_residuals": 1.5}
ROOMY_ROW = 2.3
SHARE, ROW_SHARE = {"fit": 2.0, "studentized_residuals": 1.0}, 1.5


def rows(panels) -> tuple[tuple[str, ...], ...]:
    """The rows of the figure, top to bottom: the x column first, then the rest by threes."""
    stacked = [(name,) for name in STACKED if name in panels]
    others = [name for name in panels if name not in STACKED]
    return tuple(stacked) + tuple(tuple(others[i:i + ROW_LENGTH])
                                  for i in range(0, len(others), ROW_LENGTH))


def joined(grid, i: int) -> bool:
    """True when row ``i`` is the fit panel with the residual panel sharing its x below."""
    return grid[i] == ("fit",) and i + 1 < len(grid) and grid[i + 1] == (STACKED[1],)


def width_for(grid, panel_width: float) -> float:
    """Figure width (inches) giving each panel ``panel_width`` inches in its widest row."""
    return max(LEFT + RIGHT + (len(row) - 1) * COL_GAP + TWIN * row.count("selection")
               + len(row) * panel_width for row in grid)


def least_width(grid) -> float:
    """The narrowest readable figure (inches)."""
    return width_for(grid, MIN_PANEL_WIDTH)


def _above_panels(titled: bool, legend: float) -> float:
    return PAD_TOP + (FIGURE_TITLE if titled else 0.0) + (legend + LEGEND_GAP if legend else 0.0)


def fixed_height(grid, titled: bool, legend: float) -> float:
    """Inches of the figure height that are not plotting area (``legend``: strip height)."""
    return _above_panels(titled, legend) + sum(HEAD + (JOIN if joined(grid, i) else FOOT)
                                               for i in range(len(grid)))


def least_height(grid, titled: bool, legend: float) -> float:
    """The lowest readable figure (inches)."""
    return fixed_height(grid, titled, legend) + len(grid) * MIN_PANEL_HEIGHT


def roomy_height(grid, titled: bool, legend: float) -> float:
    """The height (inches) a figure grows to when none is asked for."""
    return fixed_height(grid, titled, legend) + sum(
        ROOMY_HEIGHT.get(row[0], ROOMY_ROW) if len(row) == 1 else ROOMY_ROW for row in grid)


def check_size(name: str, pixels: int, least: float, dpi: int, grid) -> None:
    """Refuse a ``width``/``height`` of ``pixels`` below ``least`` inches at ``dpi``."""
    need = math.ceil(least * dpi - 1e-9)
    if pixels >= need:
        return
    panels = ", ".join(name for row in grid for name in row)
    raise SpecError(
        f"At {dpi} dpi the panels {panels} need a figure at least {need} px "
        f"{'wide' if name == 'width' else 'high'} (each keeps at least {MIN_PANEL_WIDTH} x "
        f"{MIN_PANEL_HEIGHT} inches of plotting area); got {pixels}.",
        field=f"plot.{name}",
        fix=f"Send {name} {need} or more, lower dpi, ask for fewer panels, or leave {name} "
            "out and the figure grows to fit.")


def boxes(grid, width: float, height: float, titled: bool,
          legend: float) -> dict[str, tuple[float, float, float, float]]:
    """Each panel's plotting area ``(left, bottom, width, height)`` in figure fractions.

    ``width``/``height`` are the figure's inches, ``legend`` the strip's height.
    """
    shares = [SHARE.get(row[0], ROW_SHARE) if len(row) == 1 else ROW_SHARE for row in grid]
    extra = max(0.0, height - least_height(grid, titled, legend)) / sum(shares)
    top = height - _above_panels(titled, legend)
    placed = {}
    for i, row in enumerate(grid):
        top -= HEAD
        panel_h = MIN_PANEL_HEIGHT + extra * shares[i]
        bottom = top - panel_h
        panel_w = (width - LEFT - RIGHT - (len(row) - 1) * COL_GAP
                   - TWIN * row.count("selection")) / len(row)
        left = LEFT
        for name in row:
            placed[name] = (left / width, bottom / height, panel_w / width, panel_h / height)
            left += panel_w + COL_GAP + (TWIN if name == "selection" else 0.0)
        top = bottom - (JOIN if joined(grid, i) else FOOT)
    return placed


def legend_corner(width: float, height: float, titled: bool) -> tuple[float, float]:
    """Upper-left corner of the legend strip in figure fractions."""
    return LEGEND_LEFT / width, 1 - (PAD_TOP + (FIGURE_TITLE if titled else 0.0)) / height


def legend_room(width: float) -> float:
    """Inches of width the legend strip may use."""
    return width - 2 * LEGEND_LEFT
