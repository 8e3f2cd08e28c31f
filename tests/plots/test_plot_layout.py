"""Where the panels go, that the legend strip never covers a panel, and the size rules.

Geometry is read back from the drawn figure (window extents after a draw, in pixels),
never from the layout module's own arithmetic. Data: a seeded random cubic with an
outlier and an influential point (invented, so that every legend entry appears).
"""

from __future__ import annotations

import itertools
import re

import numpy as np
import pytest

from service.core import ModelSpec, fit_series
from service.core.errors import SpecError
from service.plots import PANELS, PlotOptions, build_figure, layout
from service.plots.options import PANEL_TITLES

FIVE = ("fit", "studentized_residuals", "influence", "spread", "half_normal")


@pytest.fixture(scope="module")
def fitted():
    rng = np.random.default_rng(1)
    x = np.concatenate([np.sort(rng.uniform(0.0, 8.0, 29)), [14.0]])
    y = 2.0 + 1.5 * x - 0.12 * x**2 + rng.normal(0.0, 0.5, 30) * (1 + 0.1 * x)
    y[10] += 3.5
    y[-1] += 3.0
    return x, y, fit_series(x, y, model=ModelSpec(max_degree=3, select="sequential_f"))


def _drawn(fitted, options: PlotOptions):
    x, y, report = fitted
    figure = build_figure(report, x, y, options=options)
    renderer = figure.canvas.get_renderer()
    figure.draw(renderer)
    return figure, renderer


def _panels(figure) -> dict:
    """Panel name -> axes (twin axes have no title and are left out)."""
    names = {title: name for name, title in PANEL_TITLES.items()}
    return {names[ax.get_title(loc="left")]: ax for ax in figure.axes
            if ax.get_title(loc="left")}


def _least(fitted, panels, dpi=100) -> tuple[int, int]:
    """The least accepted width and height, as the refusals state them (the options
    refuse first with a one-line legend assumed, then the figure with its real strip)."""
    width = int(np.ceil(layout.least_width(layout.rows(panels)) * dpi - 1e-9))
    height = 300
    for _ in range(3):
        try:
            _drawn(fitted, PlotOptions(panels=panels, width=width, height=height, dpi=dpi))
            return width, height
        except SpecError as refused:
            assert refused.field == "plot.height"
            height = int(re.search(r"at least (\d+) px", str(refused)).group(1))
    raise AssertionError("no height accepted")


def test_rows_put_the_x_column_first_then_rows_of_three():
    assert layout.rows(PANELS) == (("fit",), ("studentized_residuals",),
                                   ("influence", "spread", "half_normal"), ("selection",))
    assert layout.rows(("half_normal", "studentized_residuals", "selection", "fit")) == (
        ("fit",), ("studentized_residuals",), ("half_normal", "selection"))


def test_residuals_sit_under_the_fit_panel_on_its_x_axis_and_the_rest_side_by_side(fitted):
    figure, renderer = _drawn(fitted, PlotOptions(panels=FIVE))
    axes = _panels(figure)
    assert list(axes) == list(FIVE)
    fit, res = (axes[n].get_window_extent(renderer) for n in ("fit", "studentized_residuals"))
    assert axes["fit"].get_shared_x_axes().joined(axes["fit"], axes["studentized_residuals"])
    assert (fit.x0, fit.x1) == pytest.approx((res.x0, res.x1))
    assert 0 < fit.y0 - res.y1 < layout.HEAD * figure.dpi + layout.JOIN * figure.dpi + 1
    assert not any(t.get_visible() and t.get_text() for t in axes["fit"].get_xticklabels())
    row = [axes[n].get_window_extent(renderer) for n in ("influence", "spread", "half_normal")]
    assert all(b.y0 == pytest.approx(row[0].y0) and b.height == pytest.approx(row[0].height)
               for b in row)
    assert row[0].x1 < row[1].x0 and row[1].x1 < row[2].x0 and row[0].y1 < res.y0
    assert row[0].x0 == pytest.approx(res.x0) and row[2].x1 == pytest.approx(res.x1)


CASES = [(PANELS, None, None, 100), (PANELS, 1600, 1000, 100), (FIVE, 800, 1100, 100),
         (("fit",), 800, 600, 100), (("fit", "selection"), 640, 480, 72),
         (("influence", "half_normal", "spread"), 1200, 500, 150)]


@pytest.mark.parametrize("panels, width, height, dpi", CASES)
def test_legend_strip_covers_no_panel_and_panels_do_not_overlap(fitted, panels, width, height,
                                                                dpi):
    figure, renderer = _drawn(fitted, PlotOptions(panels=panels, width=width, height=height,
                                                  dpi=dpi, simultaneous=True))
    (strip,) = figure.legends
    box = strip.get_window_extent(renderer)
    size = figure.get_size_inches() * dpi
    assert box.x0 >= 0 and box.x1 <= size[0] + 0.5 and box.y1 <= size[1] + 0.5
    axes = list(_panels(figure).items())
    for name, ax in axes:
        assert not box.overlaps(ax.get_window_extent(renderer)), name
        assert not box.overlaps(ax.get_tightbbox(renderer)), f"{name}: title or labels"
    for (a, ax_a), (b, ax_b) in itertools.combinations(axes, 2):
        assert not ax_a.get_window_extent(renderer).overlaps(ax_b.get_tightbbox(renderer)), (a, b)
        assert not ax_b.get_window_extent(renderer).overlaps(ax_a.get_tightbbox(renderer)), (a, b)
    labels = [t.get_text() for t in strip.get_texts()]
    assert len(labels) == len(set(labels))  # one entry per label for the whole figure


def test_smallest_accepted_size_keeps_the_least_plotting_area(fitted):
    width, height = _least(fitted, PANELS)
    figure, renderer = _drawn(fitted, PlotOptions(panels=PANELS, width=width, height=height))
    for name, ax in _panels(figure).items():
        box = ax.get_window_extent(renderer)
        assert box.width >= layout.MIN_PANEL_WIDTH * 100 - 1, name
        assert box.height >= layout.MIN_PANEL_HEIGHT * 100 - 1, name
    with pytest.raises(SpecError) as narrow:
        PlotOptions(panels=PANELS, width=width - 1, height=height)
    assert narrow.value.field == "plot.width" and f"at least {width} px" in str(narrow.value)
    with pytest.raises(SpecError) as low:  # passes the early check, fails with the legend
        _drawn(fitted, PlotOptions(panels=PANELS, width=width, height=height - 1))
    assert low.value.field == "plot.height"


def test_a_figure_without_a_size_grows_to_fit_its_panels(fitted):
    figure, renderer = _drawn(fitted, PlotOptions())
    assert tuple(figure.get_size_inches() * 100) == pytest.approx((800, 600))
    figure, renderer = _drawn(fitted, PlotOptions(panels=PANELS, dpi=150))
    width, height = figure.get_size_inches() * 150
    assert width > 800 and height > 600
    for name, ax in _panels(figure).items():
        box = ax.get_window_extent(renderer)
        assert box.width >= layout.MIN_PANEL_WIDTH * 150 and box.height >= (
            layout.MIN_PANEL_HEIGHT * 150), name


def test_a_size_no_dpi_can_honour_is_refused_naming_dpi():
    with pytest.raises(SpecError) as refused:
        PlotOptions(panels=PANELS, dpi=300).pixel_height(4000, 2.0)
    assert refused.value.field == "plot.dpi"
