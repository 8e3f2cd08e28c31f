"""Forged documents: the checksum is integrity, not authenticity, so anyone can send a
well-formed document with extreme numbers. Reading, predicting, inverting and the figures of
merit must then answer or raise a typed error — never crash, never emit a RuntimeWarning.
(Robustness property; no reference values involved. Core predict is checked by its owner.)
"""

from __future__ import annotations

import copy
import warnings

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from service.core import FitError, FitOptions, GridSpec, ModelSpec, fit_series
from service.core.models.calibration import figures_of_merit, sensitivity
from service.core.models.document import checksum, from_document, to_document
from service.core.models.inverse import invert
from service.core.polynomial import design
from tests.conftest import load_nist

wide = st.one_of(st.floats(-1e300, 1e300), st.sampled_from([0.0, 1e-300, -1e-300, 5e-324,
                                                             1e300, 1.0, -1.0]))
positive = st.one_of(st.floats(1e-300, 1e300), st.sampled_from([5e-324, 1e-300, 1.0, 1e300]))


@pytest.fixture(scope="module")
def base() -> dict:
    ref = load_nist("pontius")
    report = fit_series(ref["data"]["x"], ref["data"]["y"], model=ModelSpec(degree=2),
                        options=FitOptions(grid=GridSpec(count=3)))
    return to_document(report.model)


@settings(max_examples=120, deadline=None, database=None, derandomize=True,
          suppress_health_check=list(HealthCheck))
@given(data=st.data())
def test_forged_documents_never_crash(base, data):
    doc = copy.deepcopy(base)
    # a forger who keeps the scaling convention (else the document is refused up front)
    doc["x_min"] = data.draw(st.floats(-1e300, 1e300))
    doc["x_max"] = min(doc["x_min"] + data.draw(positive), 1e300)
    doc["x_shift"] = 0.5 * doc["x_min"] + 0.5 * doc["x_max"]
    doc["x_scale"] = (0.5 * doc["x_max"] - 0.5 * doc["x_min"]) or 1.0
    doc["sigma"] = data.draw(st.one_of(st.floats(0.0, 1e300), st.just(5e-324)))
    doc["df_residual"] = data.draw(st.integers(0, 37))
    doc["basis_coefficients"] = [data.draw(wide) for _ in range(3)]
    doc["r_factor"] = [[data.draw(wide) if j >= i else 0.0 for j in range(3)] for i in range(3)]
    with np.errstate(all="ignore"), warnings.catch_warnings():
        warnings.simplefilter("ignore")  # the forger's own arithmetic may overflow
        conversion = design.conversion(doc["x_shift"], doc["x_scale"], 2, True)
        raw = (conversion @ np.asarray(doc["basis_coefficients"], dtype=conversion.dtype))
        raw = raw.astype(float)
    doc["raw_coefficients"] = [float(v) if np.isfinite(v) else 0.0 for v in raw]
    doc["checksum"] = checksum(doc)
    readings = data.draw(st.lists(wide, min_size=1, max_size=4))
    xs = data.draw(st.lists(wide, min_size=1, max_size=4))
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        try:
            fitted = from_document(doc)
        except FitError:
            return
        for call in (lambda: invert(fitted, readings, replicates=3),
                     lambda: figures_of_merit(fitted),
                     lambda: sensitivity(fitted, xs)):
            try:
                call()
            except FitError:
                pass
