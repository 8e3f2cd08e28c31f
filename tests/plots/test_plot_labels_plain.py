"""Labels are drawn as plain text, whatever characters they hold: broken math markup,
dollar signs and braces give a figure, never a 500 (seeded property test)."""

from __future__ import annotations

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

TRICKY = st.text(alphabet=st.sampled_from(list("$^_{}\\ax1 ")), min_size=1, max_size=40)


@settings(max_examples=40, deadline=None, derandomize=True,
          suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow])
@given(label=TRICKY)
def test_any_label_text_draws(client, label):
    res = client.post("/v1/plot", json={"x": [1, 2, 3, 4, 5, 6], "y": [1, 3, 2, 5, 4, 6],
                                        "model": {"degree": 1},
                                        "plot": {"title": label, "x_label": label,
                                                 "y_label": label}})
    assert res.status_code in (200, 422), res.data[:300]


def test_the_known_breakers_draw(client):
    for label in ("$x^$", "$$", "$\\frac{a}{$", "{" * 50 + "a" + "}" * 50):
        res = client.post("/v1/plot", json={"x": [1, 2, 3, 4], "y": [1, 3, 2, 5],
                                            "model": {"degree": 1}, "plot": {"title": label}})
        assert res.status_code == 200, (label, res.data[:300])
        assert res.data[:8] == b"\x89PNG\r\n\x1a\n"


def test_data_fit_accepts_draw_across_three_hundred_decades(client):
    # y from 1e-300 to 1e300 on a log transform: /v1/fit accepts it, so /v1/plot must too.
    y = [10.0 ** e for e in range(-300, 301, 75)]
    x = list(range(1, len(y) + 1))
    for panels in (["fit"], ["fit", "studentized_residuals", "influence", "spread",
                             "half_normal"]):
        res = client.post("/v1/plot", json={"x": x, "y": y, "plot": {"panels": panels},
                                            "model": {"degree": 1, "transform_y": "log"}})
        assert res.status_code == 200, res.data[:300]
