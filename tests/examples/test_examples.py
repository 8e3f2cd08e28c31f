"""Every client example runs against live gunicorn on loopback and prints the right numbers.

The examples fit the invented greenhouse scenario (client_examples/data/greenhouse.json,
from scripts/demo_data.py). The invented data are never the reference: every printed
number is checked against statsmodels OLS fits of the same data (sequential sums of
squares as differences of residual sums of squares of nested fits — the textbook
definition of the sequential table; F tests by ``compare_f_test``; the new-observation
interval by ``get_prediction``). The examples print 6 significant digits (p-values 4).
"""

from __future__ import annotations

import json
import os
import re
import shutil
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
import statsmodels.api as sm

ROOT = Path(__file__).resolve().parents[2]
EXAMPLES = ROOT / "client_examples"
DATA = EXAMPLES / "data" / "greenhouse.json"
NEW_EC = 3.5

COMMANDS = {
    "curl": ["bash", str(EXAMPLES / "curl.sh")],
    "python": [sys.executable, str(EXAMPLES / "python" / "example.py")],
    "javascript": ["node", str(EXAMPLES / "javascript" / "example.mjs")],
    "java": ["java", str(EXAMPLES / "java" / "Example.java")],
}
TOOLS = {"curl": ("curl", "jq"), "python": (), "javascript": ("node",), "java": ("java",)}
NUMBER = r"[-+]?\d+(?:\.\d*)?(?:[eE][-+]?\d+)?"


@pytest.fixture(scope="module")
def oracle():
    body = json.loads(DATA.read_text())
    x, y = np.array(body["x"]), np.array(body["y"])
    fits = [sm.OLS(y, np.vander(x, d + 1, increasing=True)).fit() for d in range(5)]
    sequential = {"x": fits[0].ssr - fits[1].ssr, "x^2": fits[1].ssr - fits[2].ssr}
    p_add = {d: fits[d].compare_f_test(fits[d - 1])[1] for d in range(1, 5)}
    full = fits[2]
    frame = full.get_prediction(np.vander([NEW_EC], 3, increasing=True)).summary_frame(alpha=0.05)
    return {"n": x.size, "sequential": sequential, "residual": (full.df_resid, full.ssr),
            "f": {t: ss / full.mse_resid for t, ss in sequential.items()},
            "p": {"x": None, "x^2": p_add[2]}, "p_add": p_add,
            "prediction": (frame["mean"][0], frame["obs_ci_lower"][0], frame["obs_ci_upper"][0])}


def parse(output: str) -> dict:
    """The common output of the four examples."""
    lines = output.strip().splitlines()
    head = re.fullmatch(r"Greenhouse nutrient trial \(invented demo data\): (\d+) benches",
                        lines[0])
    chosen = re.fullmatch(r"chosen degree: (\d+) \((\w+)\)", lines[1])
    assert head and chosen and lines[2] == "sequential table:", output
    header = ["term", "df", "sum_of_squares", "mean_square", "F", "p_value"]
    assert lines[3].split() == header, output
    table = {}
    for line in lines[4:-1]:
        term, df, *numbers = line.split()
        table[term] = (int(df), *map(float, numbers))
    pred = re.fullmatch(rf"prediction at x = ({NUMBER}): fit ({NUMBER}), 95% new-observation "
                        rf"band ({NUMBER}) to ({NUMBER})", lines[-1])
    assert pred, lines[-1]
    return {"n": int(head[1]), "degree": int(chosen[1]), "method": chosen[2], "table": table,
            "prediction": tuple(float(v) for v in pred.groups())}


def test_demo_data_file_is_what_the_seeded_generator_makes():
    made = subprocess.run([sys.executable, str(ROOT / "scripts" / "demo_data.py"), "greenhouse"],
                          capture_output=True, text=True, check=True, timeout=60).stdout
    assert json.loads(made) == json.loads(DATA.read_text())


@pytest.mark.live
@pytest.mark.parametrize("language", sorted(COMMANDS))
def test_example_prints_the_degree_the_table_and_a_prediction(language, live_url, oracle):
    missing = [tool for tool in TOOLS[language] if shutil.which(tool) is None]
    assert not missing, f"{language} example needs {missing} on PATH (CI installs them)"
    env = {**os.environ, "BASE_URL": live_url}
    env.pop("API_TOKEN", None)
    run = subprocess.run(COMMANDS[language], capture_output=True, text=True, env=env, cwd=ROOT,
                         timeout=120)
    assert run.returncode == 0, run.stderr[-3000:]
    out = parse(run.stdout)
    assert out["n"] == oracle["n"] == 24
    # sequential F at alpha 0.05: x^2 is needed, neither x^3 nor x^4 adds significantly
    assert oracle["p_add"][2] < 0.05 < min(oracle["p_add"][3], oracle["p_add"][4])
    assert (out["degree"], out["method"]) == (2, "sequential_f")
    assert list(out["table"]) == ["x", "x^2", "residual"]
    for term in ("x", "x^2"):
        df, ss, ms, f, p = out["table"][term]
        assert df == 1
        assert ss == pytest.approx(oracle["sequential"][term], rel=1e-5)
        assert ms == pytest.approx(oracle["sequential"][term], rel=1e-5)
        assert f == pytest.approx(oracle["f"][term], rel=1e-5)
    assert out["table"]["x^2"][4] == pytest.approx(oracle["p"]["x^2"], rel=1e-3)
    df, ss, ms = out["table"]["residual"]
    assert (df, ss) == (oracle["residual"][0], pytest.approx(oracle["residual"][1], rel=1e-5))
    x_new, fit, lower, upper = out["prediction"]
    assert x_new == NEW_EC
    assert (fit, lower, upper) == pytest.approx(oracle["prediction"], rel=1e-5)


@pytest.mark.live
def test_examples_report_service_errors_and_fail(live_url, tmp_path):
    """A wrong BASE_URL path gives a problem+json 404: each example must exit non-zero."""
    env = {**os.environ, "BASE_URL": live_url + "/no-such-prefix"}
    for language, command in sorted(COMMANDS.items()):
        if language == "java":
            continue  # same error path as the others; skipped to keep the JVM start-up cost once
        run = subprocess.run(command, capture_output=True, text=True, env=env, cwd=ROOT,
                             timeout=120)
        assert run.returncode != 0, (language, run.stdout)
        assert "404" in run.stderr, (language, run.stderr)


# --- the dose-response case: a 4PL standard curve read backwards -------------------------
PLATE = EXAMPLES / "data" / "plate.json"
UNKNOWNS, REPLICATES = (0.2, 0.6, 1.4, 2.3, 3.2), 2  # as written in each example


def test_plate_data_file_is_what_the_seeded_generator_makes():
    made = subprocess.run([sys.executable, str(ROOT / "scripts" / "demo_data.py"), "plate"],
                          capture_output=True, text=True, check=True, timeout=60).stdout
    assert json.loads(made) == json.loads(PLATE.read_text())


def parse_dose_response(output: str) -> dict:
    """The common output of the four examples' dose-response case."""
    lines = output.strip().splitlines()
    head = re.fullmatch(r"ELISA plate \(invented demo data\): (\d+) standards, (\w+)", lines[0])
    ec50 = re.fullmatch(rf"ec50 ({NUMBER}), 95% interval ({NUMBER}) to ({NUMBER})", lines[1])
    span = re.fullmatch(rf"working range \(CV <= 20%, 2 replicates\): ({NUMBER}) to ({NUMBER})",
                        lines[2])
    assert head and ec50 and span, output
    readings = {}
    for line in lines[3:-1]:
        ok = re.fullmatch(rf"reading ({NUMBER}): x ({NUMBER}), 95% interval ({NUMBER}) to "
                          rf"({NUMBER}) \((\w+)\)", line)
        none = re.fullmatch(rf"reading ({NUMBER}): no concentration \((\w+)\)", line)
        assert ok or none, line
        if ok:
            readings[float(ok[1])] = (*map(float, ok.groups()[1:4]), ok[5])
        else:
            readings[float(none[1])] = (None, None, None, none[2])
    assert lines[-1] == ("back-calculated values support, never replace, a validated assay "
                         "procedure")
    return {"n": int(head[1]), "family": head[2], "ec50": tuple(map(float, ec50.groups())),
            "span": tuple(map(float, span.groups())), "readings": readings}


@pytest.fixture(scope="module")
def plate_oracle():
    # scipy's curve_fit of the textbook 4PL (y_right + (y_left - y_right)/(1 + (x/ec50)^slope))
    # with its Wald interval; x read back through the closed-form inverse of that curve
    from scipy import optimize, stats

    body = json.loads(PLATE.read_text())
    x, y = np.array(body["x"]), np.array(body["y"])

    def curve(x, y_left, y_right, slope, ec50):
        return y_right + (y_left - y_right) / (1 + (x / ec50) ** slope)

    theta, cov = optimize.curve_fit(curve, x, y, p0=[0.1, 3.0, 1.0, 10.0], maxfev=20_000)
    half = stats.t.ppf(0.975, x.size - 4) * np.sqrt(cov[3, 3])
    y_left, y_right, slope, ec50 = theta
    back = {r: ec50 * ((y_left - r) / (r - y_right)) ** (1 / slope)
            for r in UNKNOWNS if min(y_left, y_right) < r < max(y_left, y_right)}
    return {"n": x.size, "ec50": (ec50, ec50 - half, ec50 + half), "back": back}


@pytest.mark.live
@pytest.mark.parametrize("language", sorted(COMMANDS))
def test_dose_response_reads_unknowns_back_through_the_stored_curve(language, live_url,
                                                                      plate_oracle):
    missing = [tool for tool in TOOLS[language] if shutil.which(tool) is None]
    assert not missing, f"{language} example needs {missing} on PATH (CI installs them)"
    # this checkout's client first (the shared virtualenv may hold another checkout's)
    env = {**os.environ, "BASE_URL": live_url, "PYTHONPATH": str(ROOT / "client")}
    env.pop("API_TOKEN", None)
    run = subprocess.run([*COMMANDS[language], "dose-response"], capture_output=True,
                         text=True, env=env, cwd=ROOT, timeout=120)
    assert run.returncode == 0, run.stderr[-3000:]
    out = parse_dose_response(run.stdout)
    assert (out["n"], out["family"]) == (plate_oracle["n"], "logistic4")
    assert out["ec50"] == pytest.approx(plate_oracle["ec50"], rel=1e-4)
    assert sorted(out["readings"]) == sorted(UNKNOWNS)
    for reading, (x, lower, upper, status) in out["readings"].items():
        if reading in plate_oracle["back"]:
            assert x == pytest.approx(plate_oracle["back"][reading], rel=1e-4)
            assert lower < x < upper and status in ("ok", "interval_exceeds_range")
        else:  # beyond the upper plateau of the fitted curve: no concentration
            assert x is None and status == "no_real_root"
    # the working range and intervals are the service's own: printed as /v1/invert gives them
    fit = _post(live_url, "/v1/fit", json.loads(PLATE.read_text()))
    answer = _post(live_url, "/v1/invert", {"fitted_model": fit["fitted_model"],
                                            "y": list(UNKNOWNS), "replicates": REPLICATES})
    span = answer["working_range"]
    assert out["span"] == pytest.approx((span["lower"], span["upper"]), rel=1e-5)
    for row in answer["estimates"]:
        x, lower, upper, status = out["readings"][row["y"]]
        assert status == row["status"]
        if x is not None:
            assert (lower, upper) == pytest.approx((row["lower"], row["upper"]), rel=1e-5)


def _post(base: str, path: str, body: dict) -> dict:
    import urllib.request

    request = urllib.request.Request(base + path, data=json.dumps(body).encode(),
                                     headers={"Content-Type": "application/json"})
    with urllib.request.urlopen(request, timeout=60) as response:
        return json.loads(response.read())
