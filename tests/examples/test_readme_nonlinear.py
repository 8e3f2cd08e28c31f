"""The README's nonlinear examples (the invented enzyme run, the invented assay plate) say
what the service answers (documentation agreement only: demo data are never a correctness
reference; the families' correctness checks are NIST StRD and the oracles in tests/)."""

from __future__ import annotations

import json
import re
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[2]


def test_readme_enzyme_excerpt_matches_the_service(client):
    made = subprocess.run([sys.executable, str(ROOT / "scripts" / "demo_data.py"), "enzyme"],
                          capture_output=True, text=True, check=True, timeout=60)
    out = client.post("/v1/fit", json=json.loads(made.stdout)).get_json()
    readme = (ROOT / "README.md").read_text()
    section = readme[readme.index("## Your own equation"):readme.index("## Endpoints")]
    vmax, km = out["coefficients"]
    shown = {"vmax": (vmax["estimate"], "12.20"), "km": (km["estimate"], "2.698"),
             "km profile_lower": (km["profile_lower"], "2.366"),
             "km profile_upper": (km["profile_upper"], "3.076")}
    for name, (value, text) in shown.items():
        assert text in section, name
        assert value == pytest.approx(float(text), abs=0.6 * 10 ** -len(text.split(".")[1])), name
    assert re.search(rf'"iterations": {out["fit_info"]["iterations"]}\b', section)
    assert out["fit_info"]["converged"] and out["model"]["expression"] in section


def test_readme_dose_response_excerpt_matches_the_service(client):
    made = subprocess.run([sys.executable, str(ROOT / "scripts" / "demo_data.py"), "assay"],
                          capture_output=True, text=True, check=True, timeout=60)
    out = client.post("/v1/fit", json=json.loads(made.stdout)).get_json()
    readme = (ROOT / "README.md").read_text()
    section = readme[readme.index("## Choosing between curves"):readme.index("## Endpoints")]
    comparison = out["comparison"]
    assert comparison["chosen"] == "logistic5" and comparison["reason"] in section
    rows = {r["label"]: r for r in comparison["candidates"]}
    for label, rss, aicc in (("logistic4", "0.00948", "-109.87"), ("logistic5", "0.00323",
                                                                   "-132.49")):
        assert rows[label]["rss"] == pytest.approx(float(rss), rel=1e-3)
        assert rows[label]["aicc"] == pytest.approx(float(aicc), abs=0.006)
    params = {c["term"]: c for c in out["coefficients"]}
    assert params["ec50"]["estimate"] == pytest.approx(12.01, abs=0.006)
    assert params["asymmetry"]["profile_lower"] == pytest.approx(1.68, abs=0.006)
    assert params["asymmetry"]["profile_upper"] == pytest.approx(3.72, abs=0.006)
    assert out["fit_info"]["started_from"] == "automatic"
