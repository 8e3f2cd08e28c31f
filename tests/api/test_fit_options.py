"""/v1/fit request options: sections chosen by include, missing values, transforms, integer
input, degree bounds; undefined statistics as null. Oracles: numpy polyfit on the same data.
"""

from __future__ import annotations

import numpy as np
import orjson
import pytest

from tests.api.helpers import fit_ok as fit
from tests.api.helpers import post_json, seeded_quadratic


@pytest.fixture(scope="module")
def seeded():
    return seeded_quadratic()


def test_include_chooses_sections(client, seeded):
    x, y, _ = seeded
    out = fit(client, {"x": x.tolist(), "y": y.tolist(), "include": ["coefficients"]})
    assert set(out) == {"model", "n", "n_input", "dropped", "coefficients", "warnings", "flags"}
    out = fit(client, {"x": x.tolist(), "y": y.tolist(), "include": []})
    assert "coefficients" not in out and "model" in out


def test_flags_do_not_depend_on_include(client, seeded):
    # the diagnostic flags are computed whether or not the diagnostics section is returned;
    # a spike makes sure there is a test-based flag to lose
    x, y, _ = seeded
    y = y.copy()
    y[20] += 6.0
    full = fit(client, {"x": x.tolist(), "y": y.tolist(), "model": {"degree": 2}})
    assert "outliers" in {f["code"] for f in full["flags"]}
    for include in ([], ["coefficients"], ["statistics", "grid"]):
        out = fit(client, {"x": x.tolist(), "y": y.tolist(), "model": {"degree": 2},
                           "include": include})
        assert "diagnostics" not in out
        assert out["flags"] == full["flags"], include


def test_missing_drop_removes_pairs_and_reports_them(client, seeded):
    # Oracle: the same fit on the complete pairs only (numpy polyfit).
    x, y, _ = seeded
    xs, ys = x.tolist(), y.tolist()
    xs[3], ys[10] = None, None
    out = fit(client, {"x": xs, "y": ys, "missing": "drop", "model": {"degree": 1},
                       "include": ["coefficients"]})
    keep = np.ones(x.size, bool)
    keep[[3, 10]] = False
    slope, intercept = np.polyfit(x[keep], y[keep], 1)
    assert out["dropped"] == [3, 10] and out["n"] == x.size - 2 and out["n_input"] == x.size
    assert out["coefficients"][0]["estimate"] == pytest.approx(intercept, rel=1e-9)
    assert out["coefficients"][1]["estimate"] == pytest.approx(slope, rel=1e-9)


def test_transforms_fit_the_transformed_values(client, seeded):
    # Oracle: numpy polyfit on log10(x).
    x, y, _ = seeded
    out = fit(client, {"x": (x + 1).tolist(), "y": y.tolist(),
                       "model": {"degree": 1, "transform_x": "log10"},
                       "include": ["coefficients"]})
    slope, intercept = np.polyfit(np.log10(x + 1), y, 1)
    assert out["model"]["transform_x"] == "log10"
    assert out["coefficients"][1]["estimate"] == pytest.approx(slope, rel=1e-9)


def test_undefined_statistics_are_null_never_nan(client):
    # An exact fit (n = p): no residual degrees of freedom, so t, p and limits are undefined.
    response = post_json(client, "/v1/fit", {"x": [1.0, 2.0, 3.0], "y": [1.0, 4.0, 9.0],
                                             "model": {"degree": 2}})
    assert response.status_code == 200
    text = response.get_data(as_text=True)
    assert "NaN" not in text and "Infinity" not in text
    out = orjson.loads(response.data)
    assert out["statistics"]["df_residual"] == 0
    assert out["coefficients"][0]["p_value"] is None


def test_integers_are_accepted_as_numbers(client):
    # Oracle: numpy polyfit on the same (seeded random) integers.
    rng = np.random.default_rng(7)
    x = np.arange(1, 21)
    y = 3 * x + rng.integers(-5, 6, x.size)
    out = fit(client, {"x": x.tolist(), "y": y.tolist(), "model": {"degree": 1},
                       "include": ["coefficients"]})
    slope, intercept = np.polyfit(x, y, 1)
    assert out["coefficients"][1]["estimate"] == pytest.approx(slope, rel=1e-12)
    assert out["coefficients"][0]["estimate"] == pytest.approx(intercept, rel=1e-12)


def test_min_degree_bounds_the_candidates(client, seeded):
    x, y, _ = seeded
    out = fit(client, {"x": x.tolist(), "y": y.tolist(),
                       "model": {"min_degree": 2, "max_degree": 3, "select": "aic"},
                       "include": ["selection"]})
    assert [c["degree"] for c in out["selection"]["candidates"]] == [2, 3]
    assert out["model"]["degree"] in (2, 3)


def test_transform_y_fits_the_transformed_response(client, seeded):
    # Oracle: numpy polyfit of log(y) on x; the coefficients are on the transformed scale.
    x, y, _ = seeded
    positive = y - y.min() + 1.0
    out = fit(client, {"x": x.tolist(), "y": positive.tolist(),
                       "model": {"degree": 1, "transform_y": "log"},
                       "include": ["coefficients"]})
    slope, intercept = np.polyfit(x, np.log(positive), 1)
    assert out["model"]["transform_y"] == "log"
    assert out["coefficients"][0]["estimate"] == pytest.approx(intercept, rel=1e-9)
    assert out["coefficients"][1]["estimate"] == pytest.approx(slope, rel=1e-9)
