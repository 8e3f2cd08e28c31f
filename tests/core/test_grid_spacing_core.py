"""service.core.data.grid for library callers: log spacing without the web schema's checks.

Oracle: numpy's geomspace and linspace (equal ratios, equal differences).
"""

from __future__ import annotations

import numpy as np
import pytest

from service.core.data.grid import grid_points, resolved_spacing
from service.core.errors import SpecError
from service.core.spec import GridSpec


def test_automatic_spacing_is_log_only_for_a_count_over_the_data_range_on_log_x():
    assert resolved_spacing(GridSpec(), log_x=True) == "log"
    assert resolved_spacing(GridSpec(), log_x=False) == "linear"
    assert resolved_spacing(GridSpec(start=1.0, stop=9.0, count=5), log_x=True) == "linear"
    assert resolved_spacing(GridSpec(count=None, start=1.0, stop=9.0, step=2.0),
                            log_x=True) == "linear"
    assert resolved_spacing(GridSpec(spacing="linear"), log_x=True) == "linear"


def test_log_grid_from_a_blank_and_the_even_grid_unchanged():
    xs = grid_points(GridSpec(count=6), 0.0, 1000.0, 100, log_x=True, x_positive=0.01)
    np.testing.assert_allclose(xs, [0.0, *np.geomspace(0.01, 1000.0, 5)], rtol=1e-12)
    assert grid_points(GridSpec(count=1), 0.0, 10.0, 100, log_x=True, x_positive=1.0)[0] == 0
    even = grid_points(GridSpec(count=7), 0.0, 3.0, 100)
    np.testing.assert_array_equal(even, 0.5 * np.arange(7))


@pytest.mark.parametrize("spec", [
    GridSpec(count=None, start=1.0, stop=9.0, step=2.0, spacing="log"),
    GridSpec(count=5, spacing="geometric"),
    GridSpec(count=5, start=-1.0, stop=9.0, spacing="log"),
])
def test_library_refusals_name_grid_spacing(spec):
    with pytest.raises(SpecError) as info:
        grid_points(spec, 0.5, 9.0, 100, log_x=True, x_positive=0.5)
    assert info.value.field == "grid.spacing"
