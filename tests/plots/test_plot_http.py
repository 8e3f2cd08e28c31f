"""POST /v1/plot through the Flask test client: decoded images of the requested size,
format negotiation, identical bytes for identical input, and problem+json errors.

PNG is decoded with Pillow (the PNG spec: IHDR width/height), SVG parsed with the
standard library's XML parser (SVG 1.1: width/height/viewBox on the root element).
"""

from __future__ import annotations

import hashlib
import io
import json
import subprocess
import sys
import xml.etree.ElementTree as ET
from pathlib import Path

import numpy as np
import pytest
from PIL import Image

from schemas.plots import PANELS

ROOT = Path(__file__).resolve().parents[2]
SVG_NS = "{http://www.w3.org/2000/svg}"


def _body(n: int = 30, seed: int = 2, **plot) -> dict:
    rng = np.random.default_rng(seed)
    x = np.linspace(0.0, 5.0, n)
    y = 1.0 + 2.0 * x - 0.3 * x**2 + rng.normal(0.0, 0.2, n)
    body = {"x": x.tolist(), "y": y.tolist(), "model": {"max_degree": 3}}
    if plot:
        body["plot"] = plot
    return body


@pytest.mark.parametrize("width, height, dpi", [(800, 600, 100), (321, 487, 72),
                                                (1600, 1000, 200)])
def test_png_decodes_at_the_requested_pixel_size(client, width, height, dpi):
    r = client.post("/v1/plot", json=_body(width=width, height=height, dpi=dpi, format="png"))
    assert r.status_code == 200 and r.mimetype == "image/png"
    image = Image.open(io.BytesIO(r.data))
    image.load()  # decodes every scanline; a truncated or corrupt PNG raises here
    assert image.format == "PNG" and image.size == (width, height)
    assert image.mode in ("RGBA", "RGB")
    assert sum(1 for count in image.convert("L").histogram() if count) > 10  # drawn on


@pytest.mark.parametrize("fmt", ["png", "svg"])
def test_without_a_size_the_figure_grows_to_its_panels(client, fmt):
    r = client.post("/v1/plot", json=_body(panels=list(PANELS), format=fmt))
    assert r.status_code == 200, r.data[:300]
    if fmt == "png":
        image = Image.open(io.BytesIO(r.data))
        image.load()
        width, height = image.size
    else:
        root = ET.fromstring(r.data)
        width, height = (int(root.get(k).removesuffix("px")) for k in ("width", "height"))
    assert width > 800 and height > 600  # every panel keeps its least plotting area
    again = client.post("/v1/plot", json=_body(panels=list(PANELS), format=fmt,
                                               width=width, height=height))
    assert again.status_code == 200 and again.data == r.data  # the same figure, asked for


def test_svg_parses_and_states_the_requested_size(client):
    r = client.post("/v1/plot", json=_body(width=900, height=640, dpi=120,
                                           panels=["fit", "studentized_residuals"]),
                    headers={"Accept": "image/svg+xml"})
    assert r.status_code == 200 and r.mimetype == "image/svg+xml"
    root = ET.fromstring(r.data)
    assert root.tag == f"{SVG_NS}svg"
    assert (root.get("width"), root.get("height")) == ("900px", "640px")
    view = [float(v) for v in root.get("viewBox").split()]
    assert view == pytest.approx([0, 0, 900 * 72 / 120, 640 * 72 / 120])  # points: 72 per inch
    assert root.findall(f".//{SVG_NS}path"), "no drawing in the SVG"
    assert b"<dc:date>" not in r.data  # no timestamp in the metadata


def test_identical_input_gives_identical_bytes_even_in_another_process(client):
    bodies = [_body(panels=["fit", "studentized_residuals", "influence", "spread",
                            "half_normal", "selection"], format=fmt, simultaneous=True,
                    title="Trial", x_label="EC (dS/m)", y_label="Yield (kg/m²)")
              for fmt in ("png", "svg")]
    here = []
    for body in bodies:
        first, second = (client.post("/v1/plot", json=body).data for _ in range(2))
        assert first == second
        here.append(hashlib.sha256(first).hexdigest())
    code = ("import hashlib, json, sys; from service.app import create_app; "
            "c = create_app({}).test_client(); "
            "print(json.dumps([hashlib.sha256(c.post('/v1/plot', json=b).data).hexdigest() "
            "for b in json.loads(sys.stdin.read())]))")
    other = subprocess.run([sys.executable, "-c", code], input=json.dumps(bodies).encode(),
                           capture_output=True, cwd=ROOT, timeout=120,
                           env={"PATH": "/usr/bin:/bin", "MPLBACKEND": "Agg",
                                "CURVEWISE_LOG_LEVEL": "WARNING"})
    assert other.returncode == 0, other.stderr.decode()[-2000:]
    assert json.loads(other.stdout.decode().strip().splitlines()[-1]) == here


def test_different_input_gives_different_bytes(client):
    assert client.post("/v1/plot", json=_body(seed=1)).data != client.post(
        "/v1/plot", json=_body(seed=2)).data


@pytest.mark.parametrize("accept, body_format, expected", [
    ("image/svg+xml", None, "image/svg+xml"),
    ("image/png", None, "image/png"),
    ("*/*", None, "image/png"),
    ("image/svg+xml;q=0.4, image/png;q=0.9", None, "image/png"),
    ("image/png;q=0.1, image/svg+xml", None, "image/svg+xml"),
    ("image/svg+xml", "png", "image/png"),  # the body's format wins over Accept
    ("application/json", None, "image/png"),
])
def test_format_by_body_or_accept_header(client, accept, body_format, expected):
    plot = {"format": body_format} if body_format else {}
    r = client.post("/v1/plot", json=_body(**plot), headers={"Accept": accept})
    assert r.status_code == 200 and r.mimetype == expected
    assert "Accept" in r.headers.get("Vary", "")


@pytest.mark.parametrize("plot, field", [
    ({"width": 199}, "plot.width"),
    ({"height": 4001}, "plot.height"),
    ({"dpi": 10}, "plot.dpi"),
    ({"dpi": 301}, "plot.dpi"),
    ({"width": 4000, "height": 4000}, "plot.width"),       # over the pixel-area limit
    ({"panels": ["fit", "histogram"]}, "plot.panels.1"),
    ({"panels": []}, "plot.panels"),
    ({"panels": ["fit", "fit"]}, "plot.panels"),
    ({"format": "jpeg"}, "plot.format"),
    ({"width": "800"}, "plot.width"),
    ({"colour": "red"}, "plot.colour"),
    ({"title": "t" * 201}, "plot.title"),
    ({"width": 400, "height": 300, "dpi": 300, "panels": ["fit", "studentized_residuals"]},
     "plot.width"),                                          # too small for 2 panels at 300 dpi
    ({"width": 760, "panels": ["influence", "spread", "half_normal"]}, "plot.width"),
    ({"height": 480, "panels": ["fit", "studentized_residuals", "influence"]}, "plot.height"),
    ({"width": 1600, "height": 700, "dpi": 100, "panels": ["fit", "studentized_residuals",
                                                           "influence", "spread",
                                                           "half_normal", "selection"]},
     "plot.height"),
])
def test_bad_plot_options_are_422_naming_the_field(client, plot, field):
    r = client.post("/v1/plot", json=_body(**plot))
    assert r.status_code == 422, r.data[:300]
    assert r.mimetype == "application/problem+json"
    problem = r.get_json()
    assert any(key == field or key.startswith(field + ".") or key.replace("[", ".")
               .replace("]", "") == field for key in problem["errors"]), problem["errors"]


def test_fit_errors_come_through_unchanged(client):
    body = _body()
    body["y"] = body["y"][:-1]
    r = client.post("/v1/plot", json=body)
    assert r.status_code == 422 and "y" in r.get_json()["errors"]
    r = client.post("/v1/plot", data=b"not json", content_type="application/json")
    assert r.status_code == 400
    r = client.post("/v1/plot", data=b"{}", content_type="text/plain")
    assert r.status_code == 415


def test_too_many_points_for_svg_is_422_with_a_fix(client):
    body = _body(n=20_001, format="svg")
    r = client.post("/v1/plot", json=body)
    assert r.status_code == 422
    problem = r.get_json()
    assert "x" in problem["errors"] and "png" in problem["detail"]


def test_openapi_documents_both_image_types(client):
    spec = client.get("/openapi.json").get_json()
    operation = spec["paths"]["/v1/plot"]["post"]
    assert set(operation["responses"]["200"]["content"]) == {"image/png", "image/svg+xml"}


# The panel names of the first figure design; answered with a 422 listing the current ones.
RETIRED = ("residuals", "normal_quantiles", "scale_location", "leverage")


@pytest.mark.parametrize("name", RETIRED)
def test_retired_panel_names_are_refused_listing_the_current_ones(client, name):
    r = client.post("/v1/plot", json=_body(panels=["fit", name]))
    assert r.status_code == 422 and r.mimetype == "application/problem+json"
    (message,) = r.get_json()["errors"]["plot.panels[1]"]
    assert all(f"'{panel}'" in message for panel in PANELS), message


def test_openapi_and_readme_name_the_current_panels_only(client):
    spec = client.get("/openapi.json").get_json()
    options = spec["components"]["schemas"]["PlotOptions"]["properties"]
    assert options["panels"]["items"]["enum"] == list(PANELS)
    text = json.dumps(spec)
    for gone in ("normal_quantiles", "scale_location", "Cook's distance 0.5 and 1"):
        assert gone not in text, gone
    described = options["panels"]["description"]
    assert all(f"{panel}:" in described for panel in PANELS)
    readme = (ROOT / "README.md").read_text()
    figures = readme[readme.index("**Figures.**"):readme.index("**Python client**")]
    for gone in RETIRED:
        assert f"`{gone}`" not in figures and f'"{gone}"' not in figures, gone
    assert all(f"`{panel}`" in figures for panel in PANELS)
    assert "0.5 and 1" not in figures
