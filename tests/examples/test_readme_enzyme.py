"""The README's expression-family example says what the service answers for the invented
enzyme run (documentation agreement only: demo data are never a correctness reference;
the family's correctness checks are NIST StRD and the oracles in tests/api)."""

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
