"""NIST StRD nonlinear sets that are members of a built-in family, fitted over POST /v1/fit
by that family WITHOUT start values.

Source: ../shared/reference/nist-strd-nonlinear/<name>.json (read at run time, never copied;
skipped when absent, a failure under CURVEWISE_REQUIRE_REFERENCE=1). NIST's parameters
are read off ours by these conversions (each an identity of the two equations):

* Misra1a, BoxBOD: ``b1*(1 - exp(-b2*x))`` is ``exponential``
  ``plateau + (y0 - plateau)*exp(-k*x)`` with y0 held at 0 (``fixed: {"y0": 0}``):
  b1 = plateau, b2 = k.
* DanWood: ``b1*x**b2`` is ``power`` ``coefficient*x^exponent``: b1 = coefficient,
  b2 = exponent.
* Rat42: ``b1/(1 + exp(b2 - b3*x))`` is ``logistic_growth``
  ``asymptote/(1 + exp(-rate*(x - inflection)))``: b1 = asymptote, b3 = rate,
  b2 = rate*inflection. Its standard error is the delta method's,
  ``var(b2) = inflection² var(rate) + rate² var(inflection) + 2 rate inflection cov``,
  which is exact for the tangent-plane covariance: a reparameterization maps it through
  its Jacobian (Bates & Watts 1988, section 2.3).

Checks, as NIST defines them: every certified estimate and standard error to at least
6 significant digits (LRE), the residual sum of squares to at least 9.
"""

from __future__ import annotations

import json
import math

import numpy as np
import pytest

from tests.api.helpers import post_json
from tests.conftest import reference_file

MIN_LRE, MIN_RSS_LRE = 6.0, 9.0


def lre(computed: float, certified: float) -> float:
    """Log relative error, capped at 15 digits."""
    if computed == certified:
        return 15.0
    return min(15.0, -math.log10(abs(computed - certified) / abs(certified)))


def _exponential_rise(out):
    est, se, _ = _table(out)
    return [est["plateau"], est["k"]], [se["plateau"], se["k"]]


def _power(out):
    est, se, _ = _table(out)
    return [est["coefficient"], est["exponent"]], [se["coefficient"], se["exponent"]]


def _logistic_growth(out):
    est, se, cov = _table(out)
    rate, mid = est["rate"], est["inflection"]
    var_b2 = (mid ** 2 * cov("rate", "rate") + rate ** 2 * cov("inflection", "inflection")
              + 2 * rate * mid * cov("rate", "inflection"))
    return [est["asymptote"], rate * mid, rate], [se["asymptote"], math.sqrt(var_b2),
                                                  se["rate"]]


def _table(out):
    names = [c["term"] for c in out["coefficients"]]
    est = {c["term"]: c["estimate"] for c in out["coefficients"]}
    se = {c["term"]: c["std_error"] for c in out["coefficients"]}
    corr = np.array(out["correlation"])

    def cov(a, b):
        return corr[names.index(a), names.index(b)] * se[a] * se[b]
    return est, se, cov


CASES = {
    "misra1a": ({"family": "exponential", "fixed": {"y0": 0}}, _exponential_rise),
    "boxbod": ({"family": "exponential", "fixed": {"y0": 0}}, _exponential_rise),
    "danwood": ({"family": "power"}, _power),
    "rat42": ({"family": "logistic_growth"}, _logistic_growth),
}


@pytest.mark.parametrize("name", list(CASES))
def test_certified_values_without_start_values(client, name):
    ref = json.loads(reference_file(f"nist-strd-nonlinear/{name}.json").read_text())
    model, convert = CASES[name]
    body = {"x": ref["data"]["x"], "y": ref["data"]["y"], "grid": None, "model": model,
            "include": ["coefficients", "statistics"]}
    res = post_json(client, "/v1/fit", body)
    assert res.status_code == 200, res.data[:400]
    out = res.get_json()
    info = out["fit_info"]
    assert info["converged"] and info["started_from"] == "automatic", info
    cert = ref["certified"]
    estimates, errors = convert(out)
    for mine, certified in zip(estimates, cert["estimates"], strict=True):
        assert lre(mine, certified) >= MIN_LRE, (name, estimates, cert["estimates"])
    for mine, certified in zip(errors, cert["std_errors"], strict=True):
        assert lre(mine, certified) >= MIN_LRE, (name, errors, cert["std_errors"])
    rss = out["statistics"]["rss"]
    assert lre(rss, cert["residual_sum_of_squares"]) >= MIN_RSS_LRE, (name, rss)
    assert out["statistics"]["df_residual"] == cert["df"]
