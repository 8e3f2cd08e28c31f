"""Write service/http/examples.json: one real request and answer per operation.

Every request is built from the invented demo scenarios of ``scripts/demo_data.py``
(never from reference data) and sent to the app in-process; its answer is stored,
abbreviated only where it is long (list items left out, a text cut after a line), so
the OpenAPI schema still validates it. ``tests/api/test_docs_examples.py`` checks
that the stored requests are still what this script builds and that every stored
answer is still what the app says. Run it from the repository root after a
change that moves an answer::

    .venv/bin/python scripts/make_api_examples.py
"""

from __future__ import annotations

import copy
import json
import logging
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path[:0] = [str(ROOT), str(ROOT / "scripts")]

import demo_data  # noqa: E402

OUT = ROOT / "service" / "http" / "examples.json"
HTML_CUT = "</title>"  # HTML answers are shown up to the end of their title
METRICS_LINES = 6      # the HELP and TYPE lines of Curvewise's first three metric families


def _greenhouse_quadratic() -> dict:
    return demo_data.main_body("greenhouse", degree=2, include="coefficients,statistics")


def _nitrate_document(client) -> dict:
    """The fitted_model document of the invented nitrate calibration (a quadratic)."""
    answer = client.post("/v1/fit", json=demo_data.nitrate())
    return answer.get_json()["fitted_model"]


def build_requests(client) -> dict[str, dict]:
    """The examples without their answers, keyed by ``"<method> <path>"``."""
    document = _nitrate_document(client)
    plot_body = {k: v for k, v in _greenhouse_quadratic().items() if k != "include"}
    plot_body["plot"] = {"panels": ["fit", "studentized_residuals"], "format": "png",
                         "x_label": "EC (dS/m)", "y_label": "Yield (kg/m²)"}
    source = "invented data from scripts/demo_data.py"
    return {
        "post /v1/fit": {
            "name": "greenhouse_quadratic", "request": _greenhouse_quadratic(),
            "summary": "A quadratic through the invented greenhouse data "
                       f"({source} greenhouse --degree 2 --include coefficients,statistics)."},
        "post /v1/batch": {
            "name": "soil_probes", "request": demo_data.soil(probes=3),
            "summary": f"Three invented soil-moisture probes ({source} soil --probes 3), "
                       "degree chosen by BIC, summary results."},
        "post /v1/predict": {
            "name": "nitrate_predict", "request": {"fitted_model": document, "x": [7.5, 45.0]},
            "summary": "Fitted values and bands at two new concentrations from the fitted_model "
                       f"of the invented nitrate calibration ({source} nitrate); 45 lies "
                       "beyond the standards and is marked extrapolated."},
        "post /v1/invert": {
            "name": "nitrate_invert",
            "request": {"fitted_model": document, "y": [0.231, 0.95], "replicates": [3, 1]},
            "summary": "Concentrations read back from two absorbances with the same document; "
                       "0.95 is above every standard and is not extrapolated."},
        "post /v1/plot": {
            "name": "greenhouse_figure", "request": plot_body, "output": "fit.png",
            "media_type": "image/png", "external": "/docs/examples/v1-plot.png",
            "summary": "The greenhouse quadratic drawn with its studentized residuals."},
        "get /v1/families": {"name": "families", "summary": "The families and this server's "
                                                            "limits."},
        "get /healthz": {"name": "alive", "summary": "The process answers."},
        "get /readyz": {"name": "ready", "summary": "The worker is ready to fit."},
        "get /metrics": {"name": "metrics", "media_type": "text/plain",
                         "summary": "Prometheus text."},
        "get /docs": {"name": "page", "media_type": "text/html", "summary": "This page."},
        "get /problems/": {"name": "catalogue", "media_type": "text/html",
                           "summary": "The error catalogue."},
        "get /problems/{code}": {"name": "invalid_data", "media_type": "text/html",
                                 "url": "/problems/invalid_data",
                                 "parameters": {"code": "invalid_data"},
                                 "summary": "The page of one problem code."},
        "get /docs/examples/{file}": {"name": "fit_request", "url": "/docs/examples/v1-fit.json",
                                      "parameters": {"file": "v1-fit.json"},
                                      "summary": "The request of the /v1/fit example, as its "
                                                 "curl line fetches it."},
    }


def send(client, key: str, example: dict):
    """The app's answer to an example's request."""
    method, path = key.split(" ", 1)
    url = example.get("url", path)
    if method == "get":
        return client.get(url)
    return client.post(url, json=example["request"])


def abbreviate(key: str, example: dict, answer) -> tuple[object, str | None]:
    """The stored form of an answer and how it was shortened (None: not at all)."""
    media = example.get("media_type", "application/json")
    if media == "application/json":
        body = answer.get_json()
        if key == "get /v1/families":
            body = {**body, "families": body["families"][:1]}
            return body, "items"
        return body, None
    if not media.startswith("text/"):
        return None, None  # binary: shown through its external value
    text = answer.get_data(as_text=True)
    if media == "text/html":
        return text[:text.index(HTML_CUT) + len(HTML_CUT)], "prefix"
    if media == "text/plain":
        lines = [line for line in text.splitlines()  # not the client's own *_created series
                 if line.startswith(("# HELP curvewise_", "# TYPE curvewise_"))
                 and "_created " not in line]
        return "\n".join(lines[:METRICS_LINES]), "lines"
    raise ValueError(f"no stored form for {media}")


def make(client) -> dict[str, dict]:
    """Every example with its answer."""
    out = {}
    for key, example in build_requests(client).items():
        example = copy.deepcopy(example)
        answer = send(client, key, example)
        example.setdefault("media_type", "application/json")
        example["status"] = answer.status_code
        example["response_summary"] = example["summary"]
        response, how = abbreviate(key, example, answer)
        if response is not None:
            example["response"] = response
        if how:
            example["abbreviated"] = how
        out[key] = example
    return out


def main() -> int:
    logging.disable(logging.CRITICAL)
    from service.app import create_app

    examples = make(create_app({}).test_client())
    OUT.write_text(json.dumps(examples, indent=1, ensure_ascii=False) + "\n", encoding="utf-8")
    print(f"wrote {len(examples)} examples to {OUT.relative_to(ROOT)}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
