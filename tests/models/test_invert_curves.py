"""POST /v1/invert for the nonlinear families (monotone over the calibrated range).

Oracles: the fitted curve itself (a y computed on the curve at x0 must read back as x0 to
1e-9 relative), a brute-force evaluation of the band for the mean of m readings through
/v1/predict on a fine grid (the calibration interval is the piece of {x: band contains y}
around the estimate, Eisenhart 1939 — from memory — and its ends lie on the band to 1e-8),
central finite differences for the slope dy/dx, and the curve's asymptotes (a logistic
never passes its plateaus). The series are seeded invented designs (demo data).
"""

from __future__ import annotations

import numpy as np
import pytest

from tests.api.helpers import post_json
from tests.core.nonlinear.builtin_designs import cases

LEVEL, M = 0.95, 3


def _fit(client, body) -> dict:
    res = post_json(client, "/v1/fit", body)
    assert res.status_code == 200, res.data[:500]
    return res.get_json()["fitted_model"]


@pytest.fixture(scope="module")
def logistic(api):
    case = cases("logistic4", 1, 11)[0]
    model = {"family": "logistic4"} if case.scale is None else {"family": "logistic4",
                                                                "scale": case.scale}
    return _fit(api, {"x": case.x.tolist(), "y": case.y.tolist(), "model": model})


@pytest.fixture(scope="module")
def saturation(api):
    rng = np.random.default_rng(1604)
    x = np.linspace(0.5, 6.0, 24)
    y = 3.0 * (1.0 - np.exp(-0.4 * x)) + 0.03 * rng.standard_normal(x.size)
    return _fit(api, {"x": x.tolist(), "y": y.tolist(), "model": {
        "family": "expression", "expression": "a*(1 - exp(-k*x))",
        "parameters": {"a": 2.0, "k": 0.3}}})


def _curve(client, doc, xs) -> list[dict]:
    res = post_json(client, "/v1/predict", {"fitted_model": doc, "x": list(map(float, xs)),
                                            "level": LEVEL, "replicates": M})
    assert res.status_code == 200, res.data[:300]
    return res.get_json()["predictions"]


def _invert(client, doc, ys) -> dict:
    res = post_json(client, "/v1/invert", {"fitted_model": doc, "y": list(map(float, ys)),
                                           "replicates": M, "level": LEVEL})
    assert res.status_code == 200, res.data[:300]
    return res.get_json()


def _steep_points(client, doc, count=5) -> np.ndarray:
    """x where the curve is between 10% and 90% of its rise over the range."""
    xs = np.geomspace(doc["x_min"], doc["x_max"], 400) if doc["x_min"] > 0 else np.linspace(
        doc["x_min"], doc["x_max"], 400)
    fit = np.array([r["fit"] for r in _curve(client, doc, xs)])
    share = (fit - fit[0]) / (fit[-1] - fit[0])
    steep = xs[(share > 0.1) & (share < 0.9)]
    return steep[np.linspace(0, steep.size - 1, count).astype(int)]


@pytest.mark.parametrize("which", ["logistic", "saturation"])
def test_a_reading_on_the_curve_reads_back_as_its_x(client, request, which):
    doc = request.getfixturevalue(which)
    x0 = _steep_points(client, doc)
    y0 = [r["fit"] for r in _curve(client, doc, x0)]
    out = _invert(client, doc, y0)
    assert out["monotone"] is True and out["turning_points"] == []
    got = np.array([e["x"] for e in out["estimates"]])
    np.testing.assert_allclose(got, x0, rtol=1e-9)
    # slope at the estimate: central finite differences of the curve (h = 1e-6 x)
    h = 1e-6 * x0
    ends = _curve(client, doc, np.concatenate([x0 - h, x0 + h]))
    slope = (np.array([r["fit"] for r in ends[len(x0):]]) -
             np.array([r["fit"] for r in ends[:len(x0)]])) / (2 * h)
    np.testing.assert_allclose([e["sensitivity"] for e in out["estimates"]], slope, rtol=1e-6)


@pytest.mark.parametrize("which", ["logistic", "saturation"])
def test_interval_ends_lie_on_the_band_and_match_a_brute_force_scan(client, request, which):
    doc = request.getfixturevalue(which)
    x0 = _steep_points(client, doc, 3)
    y0 = np.array([r["fit"] for r in _curve(client, doc, x0)])
    for estimate, y in zip(_invert(client, doc, y0)["estimates"], y0, strict=True):
        lo, hi = estimate["lower"], estimate["upper"]
        assert estimate["status"] in ("ok", "interval_exceeds_range"), estimate
        assert lo < estimate["x"] < hi
        at = _curve(client, doc, [lo, hi])
        # each end is where one limit of the band meets y
        on_band = [min(abs(r["obs_upper"] - y), abs(r["obs_lower"] - y)) for r in at]
        assert max(on_band) <= 1e-8 * max(1.0, abs(y)), on_band
        # brute force: the band for the mean of m readings contains y exactly between them
        xs = np.linspace(lo - 0.2 * (hi - lo), hi + 0.2 * (hi - lo), 2001)
        xs = xs[xs > 0] if doc["x_min"] > 0 else xs
        rows = _curve(client, doc, xs)
        inside = np.array([r["obs_lower"] <= y <= r["obs_upper"] for r in rows])
        assert inside[(xs > lo) & (xs < hi)].all()
        assert not inside[(xs < lo) | (xs > hi)].any()


def test_readings_beyond_the_asymptotes_get_a_status_and_no_number(client, logistic):
    left, right = logistic["estimates"][:2]  # y_left, y_right: the logistic's plateaus
    span = abs(right - left)
    beyond = [max(left, right) + 0.5 * span, min(left, right) - 0.5 * span]
    out = _invert(client, logistic, beyond)
    for estimate in out["estimates"]:
        assert estimate["status"] == "no_real_root"
        assert estimate["x"] is None and estimate["lower"] is None
        assert estimate["sensitivity"] is None


def test_a_reading_reached_only_beyond_the_range_is_outside_range(client, saturation):
    x_far = saturation["x_max"] * 1.6
    y_far = _curve(client, saturation, [x_far])[0]["fit"]
    estimate = _invert(client, saturation, [y_far])["estimates"][0]
    assert estimate["status"] == "outside_range" and estimate["x"] is None
    np.testing.assert_allclose(estimate["other_roots"], [x_far], rtol=1e-9)


def test_a_peak_is_not_monotone(client):
    case = cases("gaussian_peak", 1, 11)[0]
    doc = _fit(client, {"x": case.x.tolist(), "y": case.y.tolist(),
                        "model": {"family": "gaussian_peak"}})
    centre = doc["estimates"][doc["parameter_names"].index("centre")]
    top = _curve(client, doc, [centre])[0]["fit"]
    base = _curve(client, doc, [doc["x_min"], doc["x_max"]])
    y_mid = 0.5 * (top + max(r["fit"] for r in base))
    out = _invert(client, doc, [y_mid])
    assert out["monotone"] is False
    np.testing.assert_allclose(out["turning_points"], [centre], rtol=1e-9)
    assert out["estimates"][0]["status"] == "multiple_roots_in_range"
    assert len(out["estimates"][0]["other_roots"]) == 2


def test_a_logistic_reports_its_working_range_and_other_curves_do_not(client, logistic,
                                                                     saturation):
    # the service's working range equals the core precision profile's (tested against a
    # Monte Carlo in test_precision_profile.py), for the request's replicates and limit
    from service.core import read_document
    from service.core.models.precision_profile import precision_profile

    res = post_json(client, "/v1/invert", {"fitted_model": logistic, "y": [1.5],
                                           "replicates": M, "cv_limit": 0.15})
    working = res.get_json()["working_range"]
    profile = precision_profile(read_document(logistic), cv_limit=0.15, replicates=M)
    assert working == {"cv_limit": 0.15, "replicates": M, "lower": profile.lower,
                       "upper": profile.upper}
    assert logistic["x_min"] <= working["lower"] < working["upper"] <= logistic["x_max"]
    assert _invert(client, saturation, [1.5])["working_range"] is None


FORGED = [  # well-formed v2 documents with a freshly computed checksum (a forger's)
    lambda d: d["estimates"].__setitem__(0, 1e308),
    lambda d: d["estimates"].__setitem__(2, -1e308),
    lambda d: d["estimates"].__setitem__(3, 0.0),
    lambda d: d.update(covariance=[[1e308] * 4 for _ in range(4)]),
    lambda d: d.update(covariance=[[None] * 4 for _ in range(4)]),
    lambda d: d.update(x_min=d["x_max"]),
    lambda d: d.update(x_min=-1e308, x_max=1e308),
    lambda d: d.update(x_min=5e-324, x_max=1e-323),
    lambda d: d.update(sigma=0.0, noise_variance=0.0),
    lambda d: d.update(expression="sin(1/x)*y_left + y_right*slope*ec50"),
]


@pytest.mark.filterwarnings("error::RuntimeWarning")  # numerical trouble is data, never a warning
@pytest.mark.parametrize("forge", range(len(FORGED)))
def test_forged_curve_documents_get_answers_never_server_errors(api, logistic, forge):
    import copy

    from service.core.models.canonical import checksum

    doc = copy.deepcopy(logistic)
    FORGED[forge](doc)
    doc["checksum"] = checksum(doc)
    for path, body in (("/v1/predict", {"x": [0.0, 1e-300, 0.5, 1e300, -1.0]}),
                       ("/v1/invert", {"y": [0.0, 1.0, 1e300, -1e300, 2.0], "replicates": 3})):
        answer = post_json(api, path, {"fitted_model": doc, **body})
        assert answer.status_code in (200, 422), answer.data[:300]


@pytest.mark.parametrize("slope", [0.7, 2.5])  # dy/dx at a zero dose: infinite, or zero
def test_a_log_dose_logistic_with_a_zero_dose_blank_is_monotone(slope):
    # the curve is strictly monotone on [0, x_max] (numpy: its values strictly increase on a
    # dense grid) although its slope is infinite or zero at x = 0; a reading on the curve
    # reads back to the x that produced it
    from service.core import ModelSpec, fit_series
    from service.core.models.curve_inverse import invert_curve
    from tests.core.nonlinear.builtin_designs import log4

    rng = np.random.default_rng(41)
    x = np.repeat(np.concatenate([[0.0], np.geomspace(0.01, 100, 9)]), 2)
    y = log4(x, 0.1, 2.0, slope, 1.0) + rng.normal(0, 0.02, x.size)
    fitted = fit_series(x, y, model=ModelSpec(family="logistic4", scale="log")).model
    dense = np.concatenate([[0.0], np.geomspace(0.01, 100, 4001)])
    assert np.all(np.diff(log4(dense, *fitted.estimates)) > 0)
    x0 = np.array([0.5, 1.0, 1.5])  # away from both plateaus: bounded intervals
    out = invert_curve(fitted, log4(x0, *fitted.estimates))
    assert out.monotone is True and out.turning_points == ()
    assert [e.status for e in out.estimates] == ["ok"] * 3
    np.testing.assert_allclose([e.x for e in out.estimates], x0, rtol=1e-9)
