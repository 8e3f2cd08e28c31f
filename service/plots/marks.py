"""What every panel shares: its title and line of numbers, axis labels, flag markers, limits."""

from __future__ import annotations

import numpy as np
from matplotlib.transforms import offset_copy

from service.plots import style
from service.plots.data import PlotData

NOTE_OFFSET = 3.0   # points between the top of the axes and the note line
TITLE_PAD = 15.0    # points between the top of the axes and the title (the note sits between)


def finish(ax, title: str, note: str, xlabel: str, ylabel: str) -> None:
    """Title, the note line under it (numbers the panel shows), axis labels and the look."""
    ax.set_title(title, fontsize=style.TITLE_SIZE, loc="left", pad=TITLE_PAD)
    if note:
        ax.text(0.0, 1.0, note, ha="left", va="bottom", fontsize=style.NOTE_SIZE,
                color=style.NOTE_COLOUR,
                transform=offset_copy(ax.transAxes, fig=ax.figure, y=NOTE_OFFSET,
                                      units="points"))
    ax.set_xlabel(xlabel, fontsize=style.FONT_SIZE)
    ax.set_ylabel(ylabel, fontsize=style.FONT_SIZE)
    style.style_axes(ax)


def flags(ax, data: PlotData, xs: np.ndarray, ys: np.ndarray, order=None) -> None:
    """Ring the flagged points (``xs``, ``ys``) with one shape per flag.

    ``order`` maps the drawn points to the data's points when they were re-sorted.
    """
    finite = np.isfinite(xs) & np.isfinite(ys)
    for kind, label, marker in style.FLAGS:
        mask = data.flags[kind] if order is None else data.flags[kind][order]
        mask = mask & finite
        if mask.any():
            ax.plot(xs[mask], ys[mask], label=label, **marker)


def outlier_limits(ax, data: PlotData) -> float:
    """The outlier limits ``±outlier_t`` as horizontal lines; returns the limit (NaN: none)."""
    limit = data.threshold("outlier_t")
    if np.isfinite(limit):
        ax.axhline(limit, label=f"outlier limits ±{limit:.3g}", **style.OUTLIER_LIMIT)
        ax.axhline(-limit, **style.OUTLIER_LIMIT)
    return limit


def symmetric_limit(values: np.ndarray, *lines: float, least: float = 1.0) -> float:
    """A symmetric y range showing every finite value and every finite line, with room."""
    finite = np.abs(values[np.isfinite(values)])
    reach = [float(finite.max())] if finite.size else []
    reach += [abs(v) for v in lines if np.isfinite(v)]
    return 1.12 * max(reach + [least])
