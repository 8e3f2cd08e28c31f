"""Where panels go: a grid of rows and columns with fixed margins in inches.

Fixed margins are much cheaper than a layout engine (constrained layout
roughly doubles the render time) and, because text sizes are in points,
margins in inches keep labels clear of each other at every size and dpi.
"""

from __future__ import annotations

import math

# Margins and gaps in inches: room for tick labels, axis labels and panel titles.
LEFT, RIGHT, RIGHT_TWIN, BOTTOM, TOP, TITLE = 0.62, 0.18, 0.72, 0.5, 0.3, 0.28
COL_GAP, COL_GAP_TWIN, ROW_GAP = 0.75, 1.25, 0.72
MIN_PANEL_WIDTH, MIN_PANEL_HEIGHT = 1.2, 0.9  # inches of plotting area per panel


def grid_shape(count: int) -> tuple[int, int]:
    """Rows and columns for ``count`` panels: 1 -> 1x1, 2 -> 1x2, 3-4 -> 2x2, 5-6 -> 2x3."""
    cols = 1 if count == 1 else 2 if count <= 4 else 3
    return math.ceil(count / cols), cols


def margins(count: int, width_in: float, height_in: float, *, title: bool,
            second_axis: bool) -> dict[str, float]:
    """``Figure.subplots_adjust`` arguments (figure fractions) for ``count`` panels."""
    rows, cols = grid_shape(count)
    left, right = LEFT, RIGHT_TWIN if second_axis else RIGHT
    top = TOP + (TITLE if title else 0.0)
    col_gap = COL_GAP_TWIN if second_axis else COL_GAP
    axes_w, axes_h = panel_size(count, width_in, height_in, title=title,
                                second_axis=second_axis)
    return {"left": left / width_in, "right": 1 - right / width_in,
            "bottom": BOTTOM / height_in, "top": 1 - top / height_in,
            "wspace": col_gap / axes_w if cols > 1 else 0.0,
            "hspace": ROW_GAP / axes_h if rows > 1 else 0.0}


def panel_size(count: int, width_in: float, height_in: float, *, title: bool,
               second_axis: bool) -> tuple[float, float]:
    """Width and height (inches) of each panel's plotting area."""
    rows, cols = grid_shape(count)
    right = RIGHT_TWIN if second_axis else RIGHT
    col_gap = COL_GAP_TWIN if second_axis else COL_GAP
    top = TOP + (TITLE if title else 0.0)
    axes_w = (width_in - LEFT - right - (cols - 1) * col_gap) / cols
    axes_h = (height_in - BOTTOM - top - (rows - 1) * ROW_GAP) / rows
    return axes_w, axes_h
