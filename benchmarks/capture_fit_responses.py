"""Capture varied /v1/fit answers (status, content type, body bytes) and /openapi.json, to
compare two checkouts byte for byte.

A speed change to the request path must not change one byte of an answer. This script sends
the same varied requests (polynomial fits with every include option, weights, transforms,
missing values, nonlinear and expression families, comparisons, grids, and many invalid
bodies) to the in-process app of one checkout and writes what came back to a JSON file;
``--compare A B`` then lists every difference between two such files.

Run, say, with the commit before a change exported to /tmp/base (``git archive``); each
capture runs in a fresh interpreter with that checkout first on ``sys.path``::

    .venv/bin/python benchmarks/capture_fit_responses.py --root /tmp/base --out /tmp/before.json
    .venv/bin/python benchmarks/capture_fit_responses.py --out /tmp/after.json
    .venv/bin/python benchmarks/capture_fit_responses.py --compare /tmp/before.json /tmp/after.json

Headers that differ on every request (``X-Request-ID``) are left out. Nothing is asserted;
the comparison prints the differences and exits 1 when there are any.
"""

from __future__ import annotations

import argparse
import base64
import json
import os
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
KEPT_HEADERS = ("Content-Type", "Content-Length", "Cache-Control", "Retry-After",
                "X-Content-Type-Options")


def _series(n: int = 30, seed: int = 7):
    """Seeded demo data (invented, for this comparison only)."""
    import numpy as np

    rng = np.random.default_rng(seed)
    x = np.linspace(0.5, 10.0, n)
    y = 2.0 + 0.7 * x - 0.05 * x**2 + rng.normal(0.0, 0.2, n)
    return x.round(6).tolist(), y.round(6).tolist()


def cases() -> list[tuple[str, object, str]]:
    """(name, body, content type): each a request of the comparison."""
    import numpy as np

    x, y = _series()
    w = [1.0 + (i % 3) for i in range(len(x))]
    rng = np.random.default_rng(11)
    dose = [0.01, 0.03, 0.1, 0.3, 1.0, 3.0, 10.0, 30.0] * 2
    resp = [round(1.0 + 9.0 / (1.0 + (1.0 / d) ** 1.2) + float(rng.normal(0, 0.15)), 5)
            for d in dose]
    t = [0.5 * i for i in range(1, 17)]
    rise = [round(float(5.0 * (1 - np.exp(-0.4 * v)) + rng.normal(0, 0.05)), 5) for v in t]
    base = {"x": x, "y": y}
    sections = ("coefficients", "anova", "statistics", "selection", "diagnostics", "grid",
                "fitted_model")
    out: list[tuple[str, object, str]] = [("default", base, "application/json")]
    for section in sections:
        out.append((f"include_{section}", {**base, "include": [section]}, "application/json"))
    out += [
        ("include_none", {**base, "include": []}, "application/json"),
        ("include_dup", {**base, "include": ["grid", "grid", "coefficients"]}, "application/json"),
        ("degree2", {**base, "model": {"degree": 2}}, "application/json"),
        ("degree0", {**base, "model": {"degree": 0, "intercept": True}}, "application/json"),
        ("no_intercept", {**base, "model": {"degree": 2, "intercept": False}}, "application/json"),
        ("select_aic", {**base, "model": {"max_degree": 5, "min_degree": 2, "select": "aic"}},
         "application/json"),
        ("select_press", {**base, "model": {"max_degree": 4, "select": "press",
                                            "alpha": 0.1}}, "application/json"),
        ("family_poly", {**base, "model": {"family": "polynomial", "max_degree": 2,
                                           "select": None}}, "application/json"),
        ("weights", {**base, "weights": w, "model": {"degree": 2}}, "application/json"),
        ("weights_null", {**base, "weights": None}, "application/json"),
        ("known_sd", {**base, "weights": w, "weighting": "known_sd"}, "application/json"),
        ("transform_log", {**base, "model": {"degree": 1, "transform_x": "log",
                                             "transform_y": "sqrt"}}, "application/json"),
        ("transform_recip", {**base, "model": {"degree": 1, "transform_y": "reciprocal"}},
         "application/json"),
        ("level", {**base, "level": 0.9}, "application/json"),
        ("level_int_like", {**base, "level": 0.5, "model": {"alpha": 0.25}}, "application/json"),
        ("missing_drop", {"x": [*x[:5], None, *x[6:]], "y": [*y[:3], None, *y[4:]],
                          "missing": "drop"}, "application/json"),
        ("ints", {"x": list(range(12)), "y": [i * i % 7 for i in range(12)],
                  "model": {"degree": 1}}, "application/json"),
        ("grid_null", {**base, "grid": None}, "application/json"),
        ("grid_count", {**base, "grid": {"count": 7}}, "application/json"),
        ("grid_count_float", {**base, "grid": {"count": 5.0}}, "application/json"),
        ("grid_range", {**base, "grid": {"start": -1, "stop": 12.5, "count": 9}},
         "application/json"),
        ("grid_step", {**base, "grid": {"start": 0, "stop": 3, "step": 0.5}}, "application/json"),
        ("grid_x", {**base, "grid": {"x": [0.0, 1.5, 30.0]}}, "application/json"),
        ("grid_empty", {**base, "grid": {}}, "application/json"),
        ("logistic4", {"x": dose, "y": resp, "model": {"family": "logistic4"}},
         "application/json"),
        ("exponential_fixed", {"x": t, "y": rise, "model": {"family": "exponential",
                                                           "fixed": {"y0": 0}}},
         "application/json"),
        ("expression", {"x": t, "y": rise, "model": {
            "family": "expression", "expression": "a*(1 - exp(-k*x))",
            "parameters": {"a": 4, "k": 0.3}}}, "application/json"),
        ("candidates", {"x": t, "y": rise, "model": {"candidates": [
            {"family": "exponential"}, {"degree": 2}], "select": "aicc"}}, "application/json"),
        ("candidates_ftest", {**base, "model": {"candidates": [
            {"degree": 1}, {"degree": 2}, {"degree": 3}], "select": "f_test"}},
         "application/json"),
    ]
    bad = [
        ("err_empty_body", b"", "application/json"),
        ("err_not_json", b"{x", "application/json"),
        ("err_nan", b'{"x": [NaN], "y": [1]}', "application/json"),
        ("err_media", b'{"x": [1], "y": [1]}', "text/plain"),
        ("err_list_body", [1, 2], "application/json"),
        ("err_missing_y", {"x": x}, "application/json"),
        ("err_len", {"x": x, "y": y[:-1]}, "application/json"),
        ("err_null_item", {"x": [1, None, 3, 4], "y": [1, 2, 3, 4]}, "application/json"),
        ("err_string_item", {"x": [1, "2", 3], "y": [1, 2, 3]}, "application/json"),
        ("err_bool_item", {"x": [1, True, 3], "y": [1, 2, 3]}, "application/json"),
        ("err_big_int", b'{"x": [1, 1' + b"0" * 400 + b', 3], "y": [1, 2, 3]}',
         "application/json"),
        ("err_empty_x", {"x": [], "y": []}, "application/json"),
        ("err_unknown", {**base, "colour": "red"}, "application/json"),
        ("err_misplaced", {**base, "degree": 2}, "application/json"),
        ("err_level", {**base, "level": 1.5}, "application/json"),
        ("err_level_str", {**base, "level": "0.9"}, "application/json"),
        ("err_missing", {**base, "missing": "skip"}, "application/json"),
        ("err_include", {**base, "include": ["everything"]}, "application/json"),
        ("err_include_type", {**base, "include": "grid"}, "application/json"),
        ("err_model_type", {**base, "model": 3}, "application/json"),
        ("err_family", {**base, "model": {"family": "spline"}}, "application/json"),
        ("err_degree_both", {**base, "model": {"degree": 2, "max_degree": 3}},
         "application/json"),
        ("err_degree_limit", {**base, "model": {"degree": 40}}, "application/json"),
        ("err_degree_float", {**base, "model": {"degree": 2.5}}, "application/json"),
        ("err_min_gt_max", {**base, "model": {"max_degree": 2, "min_degree": 3}},
         "application/json"),
        ("err_intercept", {**base, "model": {"intercept": 1}}, "application/json"),
        ("err_grid_count", {**base, "grid": {"count": 1}}, "application/json"),
        ("err_grid_big", {**base, "grid": {"count": 10**7}}, "application/json"),
        ("err_grid_step", {**base, "grid": {"step": 0.5}}, "application/json"),
        ("err_grid_stop", {**base, "grid": {"start": 3, "stop": 1}}, "application/json"),
        ("err_weights_len", {**base, "weights": [1.0]}, "application/json"),
        ("err_weights_neg", {**base, "weights": [-1.0] * len(x)}, "application/json"),
        ("err_too_few", {"x": [1, 2], "y": [1, 2], "model": {"degree": 3}},
         "application/json"),
        ("err_log_negative", {"x": [-1, 1, 2, 3], "y": [1, 2, 3, 4],
                              "model": {"degree": 1, "transform_x": "log"}},
         "application/json"),
        ("err_weighting", {**base, "weighting": "known_sd"}, "application/json"),
    ]
    return out + bad


def capture(out_path: Path) -> None:
    """Send every case to this checkout's in-process app and write the answers."""
    import orjson

    import service
    from service.app import create_app

    print(f"capturing the app of {Path(service.__file__).parent.parent}")
    client = create_app().test_client()
    answers = {}
    for name, body, content_type in cases():
        data = body if isinstance(body, bytes) else orjson.dumps(body)
        response = client.post("/v1/fit", data=data, content_type=content_type)
        answers[name] = {"status": response.status_code,
                         "headers": {k: response.headers.get(k) for k in KEPT_HEADERS},
                         "body": base64.b64encode(response.get_data()).decode()}
    spec = client.get("/openapi.json")
    answers["openapi.json"] = {"status": spec.status_code, "headers": {},
                               "body": base64.b64encode(spec.get_data()).decode()}
    out_path.write_text(json.dumps(answers, indent=1, sort_keys=True))
    statuses = sorted({a["status"] for a in answers.values()})
    print(f"{len(answers)} answers written to {out_path} (statuses {statuses})")


def compare(first: Path, second: Path) -> int:
    """Print every difference between two captures; 1 if any."""
    a, b = json.loads(first.read_text()), json.loads(second.read_text())
    differ = [name for name in sorted(set(a) | set(b)) if a.get(name) != b.get(name)]
    for name in differ:
        left, right = a.get(name) or {}, b.get(name) or {}
        print(f"DIFFERENT {name}: status {left.get('status')} vs {right.get('status')}")
        for side, answer in (("before", left), ("after", right)):
            text = base64.b64decode(answer.get("body", "")).decode("utf-8", "replace")
            print(f"  {side}: {answer.get('headers')} {text[:300]}")
    print(f"{len(set(a) | set(b))} answers compared, {len(differ)} different")
    return 1 if differ else 0


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--root", type=Path, default=ROOT, help="checkout to capture")
    parser.add_argument("--out", type=Path, help="where to write the capture")
    parser.add_argument("--compare", type=Path, nargs=2, metavar=("BEFORE", "AFTER"))
    args = parser.parse_args()
    if args.compare:
        return compare(*args.compare)
    if args.out is None:
        parser.error("give --out (capture) or --compare BEFORE AFTER")
    root = args.root.resolve()
    # a fresh interpreter with that checkout first on sys.path (an editable install of
    # another checkout in the virtualenv must not answer instead)
    env = {**os.environ, "PYTHONPATH": str(root)}
    return subprocess.call([sys.executable, str(Path(__file__).resolve()), "--out",
                            str(args.out.resolve()), "--inner"], cwd=root, env=env)


if __name__ == "__main__":
    if "--inner" in sys.argv:  # the child run: the checkout's own code first on sys.path
        sys.path.insert(0, os.environ["PYTHONPATH"])
        capture(Path(sys.argv[sys.argv.index("--out") + 1]))
        sys.exit(0)
    sys.exit(main())
