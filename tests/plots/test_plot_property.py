"""Property: any body the schema accepts gets a decodable image or a 4xx problem, never a 500.

Hypothesis, derandomized (seeded) and bounded in examples, draws small awkward series
(repeated x, huge and tiny magnitudes, missing values) with random panels and sizes.
"""

from __future__ import annotations

import io

from hypothesis import HealthCheck, event, given, settings
from hypothesis import strategies as st
from PIL import Image

from schemas.plots import PANELS

finite = st.floats(min_value=-1e12, max_value=1e12, allow_nan=False, allow_infinity=False)


@st.composite
def bodies(draw):
    n = draw(st.integers(min_value=1, max_value=25))
    x = draw(st.lists(st.one_of(finite, st.sampled_from([0.0, 1.0, 1e-300])), min_size=n,
                      max_size=n))
    y = draw(st.lists(finite, min_size=n, max_size=n))
    model = draw(st.one_of(st.builds(lambda d: {"degree": d}, st.integers(0, 4)),
                           st.builds(lambda m, s: {"max_degree": m, "select": s},
                                     st.integers(1, 4),
                                     st.sampled_from(["sequential_f", "aic", "bic", "press",
                                                      "adj_r2", "aicc"]))))
    panels = draw(st.lists(st.sampled_from(PANELS), min_size=1, max_size=6, unique=True))
    size = st.one_of(st.none(), st.integers(200, 1400))
    plot = {"panels": panels, "width": draw(size), "height": draw(size),
            "dpi": draw(st.sampled_from([50, 72, 100])),
            "format": draw(st.sampled_from(["png", "svg"])),
            "simultaneous": draw(st.booleans())}
    return {"x": x, "y": y, "model": model, "plot": plot,
            "grid": draw(st.sampled_from([None, {"count": 7}]))}


@settings(max_examples=40, deadline=None, derandomize=True, database=None,
          suppress_health_check=[HealthCheck.too_slow, HealthCheck.function_scoped_fixture])
@given(body=bodies())
def test_plot_answers_an_image_or_a_problem(client, body):
    r = client.post("/v1/plot", json=body)
    event(f"status {r.status_code}")
    assert r.status_code in (200, 413, 422), (r.status_code, r.data[:500])
    if r.status_code != 200:
        problem = r.get_json()
        assert r.mimetype == "application/problem+json" and problem["errors"], problem
        return
    if body["plot"]["format"] == "png":
        image = Image.open(io.BytesIO(r.data))
        image.load()
        for asked, got in zip((body["plot"]["width"], body["plot"]["height"]), image.size,
                              strict=True):
            assert got == asked if asked is not None else got >= 600
    else:
        assert r.data.lstrip().startswith(b"<?xml") and b"</svg>" in r.data[-100:]
