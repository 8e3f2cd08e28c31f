"""Access to the stored NIST StRD nonlinear files (read at run time, never copied)."""

from __future__ import annotations

import json
import os
from pathlib import Path

import pytest

NONLINEAR_DIR = (Path(__file__).resolve().parents[3] / ".." / "shared" / "reference"
                 / "nist-strd-nonlinear")


@pytest.fixture
def nist_nonlinear():
    """Loader of ``../shared/reference/nist-strd-nonlinear/<name>.json``.

    Skips when the folder is absent, unless CURVEWISE_REQUIRE_REFERENCE=1 (then fails).
    """
    if not NONLINEAR_DIR.is_dir():
        reason = f"reference folder {NONLINEAR_DIR} is absent"
        if os.environ.get("CURVEWISE_REQUIRE_REFERENCE") == "1":
            pytest.fail(reason)
        pytest.skip(reason)

    def load(name: str) -> dict:
        return json.loads((NONLINEAR_DIR / f"{name}.json").read_text())
    return load
