"""The wire schema and the figure builder agree on panel names and limits."""

from __future__ import annotations

import itertools

import schemas.plots as wire
import service.plots as figures
from service.plots import layout
from service.plots.options import BASE_SIZE


def test_names_and_limits_are_the_same_on_both_sides():
    assert wire.PANELS == figures.PANELS
    assert wire.FORMATS == figures.FORMATS
    assert wire.X_SCALES == figures.X_SCALES
    assert (wire.MIN_PIXELS, wire.MAX_PIXELS, wire.MAX_AREA) == (
        figures.MIN_PIXELS, figures.MAX_PIXELS, figures.MAX_AREA)
    assert (wire.MIN_DPI, wire.MAX_DPI, wire.MAX_LABEL) == (
        figures.MIN_DPI, figures.MAX_DPI, figures.MAX_LABEL)
    assert wire.MIN_PANEL_INCHES == (layout.MIN_PANEL_WIDTH, layout.MIN_PANEL_HEIGHT)
    assert wire.BASE_SIZE == BASE_SIZE


def test_plot_body_is_the_fit_body_plus_plot():
    from schemas.fit import FitRequestSchema

    fit_fields = set(FitRequestSchema().fields)
    plot_fields = set(wire.PlotRequestSchema().fields)
    assert plot_fields - fit_fields == {"plot"} and fit_fields <= plot_fields


def test_every_panel_set_grows_to_a_size_within_the_limits():
    # a tall legend strip (2 inches) as the worst case; the figure measures the real one
    for count in range(1, len(figures.PANELS) + 1):
        for panels in itertools.combinations(figures.PANELS, count):
            for dpi, titled in ((100, True), (150, False)):
                options = figures.PlotOptions(panels=panels, dpi=dpi,
                                              title="t" if titled else None)
                width = options.pixel_width()
                height = options.pixel_height(width, 2.0)
                assert width * height <= figures.MAX_AREA, panels
                assert width >= BASE_SIZE[0] and height >= BASE_SIZE[1], panels
                rows = layout.rows(panels)
                assert width >= layout.least_width(rows) * dpi - 1e-9, panels
                assert height >= layout.least_height(rows, titled, 2.0) * dpi - 1e-9, panels
