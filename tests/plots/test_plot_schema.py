"""The wire schema and the figure builder agree on panel names and limits."""

from __future__ import annotations

import schemas.plots as wire
import service.plots as figures
from service.plots import layout


def test_names_and_limits_are_the_same_on_both_sides():
    assert wire.PANELS == figures.PANELS
    assert wire.FORMATS == figures.FORMATS
    assert (wire.MIN_PIXELS, wire.MAX_PIXELS, wire.MAX_AREA) == (
        figures.MIN_PIXELS, figures.MAX_PIXELS, figures.MAX_AREA)
    assert (wire.MIN_DPI, wire.MAX_DPI, wire.MAX_LABEL) == (
        figures.MIN_DPI, figures.MAX_DPI, figures.MAX_LABEL)


def test_plot_body_is_the_fit_body_plus_plot():
    from schemas.fit import FitRequestSchema

    fit_fields = set(FitRequestSchema().fields)
    plot_fields = set(wire.PlotRequestSchema().fields)
    assert plot_fields - fit_fields == {"plot"} and fit_fields <= plot_fields


def test_default_size_leaves_room_for_every_panel_count():
    for count in range(1, len(figures.PANELS) + 1):
        w, h = layout.panel_size(count, 8.0, 6.0, title=True, second_axis=True)
        assert w >= layout.MIN_PANEL_WIDTH and h >= layout.MIN_PANEL_HEIGHT, count
