"""One legend strip for the whole figure, above the panels: it never covers data.

Every panel labels what it draws; the strip lists each label once (the first
panel's artist stands for it: the same label always has the same style), in
as many columns as fit the width, so it wraps to more lines on a narrow figure.
"""

from __future__ import annotations

from matplotlib.legend import Legend

from service.plots import style

_OPTIONS = {"loc": "upper left", "frameon": False, "fontsize": style.LEGEND_SIZE,
            "handlelength": 2.2, "columnspacing": 1.4, "borderaxespad": 0.0,
            "borderpad": 0.2, "labelspacing": 0.35}


def entries(figure) -> tuple[list, list]:
    """Distinct labelled artists of every axes of ``figure``, in drawing order."""
    handles, labels, seen = [], [], set()
    for ax in figure.axes:
        for handle, label in zip(*ax.get_legend_handles_labels(), strict=True):
            if label not in seen:
                seen.add(label)
                handles.append(handle)
                labels.append(label)
    return handles, labels


def strip(figure, room: float) -> tuple[Legend | None, float]:
    """Add the legend strip to ``figure``, at most ``room`` inches wide, and its height in
    inches; ``(None, 0.0)`` when nothing is labelled.

    First one line; when that is too wide, a column count guessed from the measured
    entry widths, lowered until the strip fits. Its position is set by :func:`place`.
    """
    handles, labels = entries(figure)
    if not handles:
        return None, 0.0
    renderer, room_px = figure.canvas.get_renderer(), room * figure.dpi
    legend = figure.legend(handles, labels, ncols=len(handles), **_OPTIONS)
    extent = legend.get_window_extent(renderer)
    if extent.width > room_px:
        columns = min(len(handles) - 1, _columns_guess(legend, renderer, room_px) + 1)
        while True:
            legend.remove()
            legend = figure.legend(handles, labels, ncols=columns, **_OPTIONS)
            extent = legend.get_window_extent(renderer)
            if columns == 1 or extent.width <= room_px:
                break
            columns -= 1
    return legend, extent.height / figure.dpi


def _columns_guess(legend: Legend, renderer, room_px: float) -> int:
    """How many entries of average measured width fit side by side in ``room_px``."""
    texts = [t.get_window_extent(renderer).width for t in legend.get_texts()]
    font_px = legend.prop.get_size_in_points() * legend.figure.dpi / 72
    entry = sum(texts) / len(texts) + (legend.handlelength + legend.handletextpad
                                       + legend.columnspacing) * font_px
    return max(1, int(room_px // entry))


def place(legend: Legend | None, corner: tuple[float, float]) -> None:
    """Pin the strip's upper-left corner at ``corner`` (figure fractions)."""
    if legend is not None:
        legend.set_bbox_to_anchor(corner, transform=legend.figure.transFigure)
