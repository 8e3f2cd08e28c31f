"""The checksum's canonical bytes written by orjson equal the documented definition's.

The definition (docs/fitted-model.md, "Canonical form and checksum") is the standard
library's ``json.dumps(body, sort_keys=True, separators=(",", ":"))`` over the normalized
body; ``service.core.models.canonical`` writes the same bytes with orjson and rewrites the
float layouts where the two differ. Every check here compares against the standard library
directly, on seeded random doubles of every magnitude and on the edge cases of the rewrite.
"""

from __future__ import annotations

import hashlib
import json
import math

import numpy as np
import pytest

from service.core.models.canonical import _fast_canonical, canonical_bytes, checksum


def _definition(body: dict) -> bytes:
    payload = {key: value for key, value in body.items() if key != "checksum"}
    return json.dumps(payload, sort_keys=True, separators=(",", ":")).encode()


def _doubles(rng: np.random.Generator, size: int) -> list[float]:
    """Finite doubles of every magnitude: random bit patterns, log-uniform magnitudes,
    rounded decimals and whole numbers."""
    bits = rng.integers(0, 2**63, size=size, dtype=np.uint64) | (
        rng.integers(0, 2, size=size, dtype=np.uint64) << np.uint64(63))
    from_bits = bits.view(np.float64)
    log_uniform = rng.choice([-1.0, 1.0], size) * 10.0 ** rng.uniform(-320, 308, size)
    near_edges = rng.choice([-1.0, 1.0], size) * 10.0 ** rng.uniform(-6, -3, size)
    decimals = np.round(rng.uniform(-1e6, 1e6, size), 3)
    values = np.concatenate([from_bits, log_uniform, near_edges, decimals])
    return [float(v) for v in values[np.isfinite(values)]]


EDGES = [0.0, -0.0, 1.0, 1e-4, 1e-5, 9.999999999999999e-05, 1.0000000000000001e-05,
         9.5e-06, 1e-06, 2.5e-09, 1e-10, 5e-324, 2.2250738585072014e-308, 1e16,
         9999999999999998.0, 1e22, 1.7976931348623157e308, 123456789.125, 10.00001,
         100.00001, 0.1, 1e15, 3.3306690738754696e-16]


def test_random_doubles_of_every_magnitude_give_the_definitions_bytes():
    # Against json.dumps (the documented definition): 40,000 seeded doubles in documents
    # shaped like the writers' (vectors, matrices, scalars, strings, ints, bools, nulls).
    rng = np.random.default_rng(20261205)
    values = _doubles(rng, 10_000)
    for start in range(0, len(values), 400):
        chunk = values[start:start + 400]
        body = {"family": "polynomial", "terms": ["1", "x", "x^2"], "degree": 2,
                "intercept": True, "sigma": chunk[0], "vector": chunk[1:200],
                "matrix": [chunk[200 + 20 * i:220 + 20 * i] for i in range(10)],
                "note": None, "n": 50}
        fast = _fast_canonical(body, finite=True)
        assert fast is not None
        assert fast == _definition(body)


@pytest.mark.parametrize("value", EDGES + [-v for v in EDGES])
def test_edge_magnitudes_of_the_layout_rewrite(value):
    body = {"a": value, "b": [value, 1.5, value], "c": [[value], [2.5e-09, value]]}
    # written=True: no normalization of -0.0, so the layout of every edge is compared as is
    assert canonical_bytes(body, written=True) == _definition(body)
    assert _fast_canonical(body, finite=True) is not None


@pytest.mark.parametrize("text", ["e-mail", "x 0.00001", "caf\u00e9", 'say "hi"', "tab\there",
                                  "\u00e9", "back\\slash", "10e-5"])
def test_strings_the_fast_writer_leaves_alone_give_the_definitions_bytes(text):
    # A string holding what the rewrite looks for, or needing escapes, takes the standard
    # encoder: the bytes (and the checksum) stay the definition's.
    body = {"terms": [text, "x"], "family": text, "v": [2.5e-09, 6.25e-05, 1.0]}
    assert canonical_bytes(body) == _definition(body)
    assert checksum(body) == "sha256:" + hashlib.sha256(_definition(body)).hexdigest()


def test_values_outside_plain_json_give_the_definitions_bytes():
    body = {"big": 2**70, "neg": -(2**64), "f64": np.float64(2.5e-09), "t": (1.0, 2),
            "nested": {"z": 1, "a": [0.5, {"y": 6.25e-05, "b": None}]}, "zero": -0.0}
    assert canonical_bytes(body) == _definition({**body, "zero": 0.0})


def test_non_finite_numbers_are_still_refused():
    # The definition has no token for NaN or infinity (the writers turn them into null);
    # orjson would write null, so the standard encoder must still decide and refuse.
    for bad in (math.nan, math.inf, -math.inf):
        with pytest.raises(ValueError):
            canonical_bytes({"a": [1.0, bad]})


def test_a_writers_document_keeps_its_checksum():
    from service.core import ModelSpec, fit_series
    from service.core.models.document import to_document

    x = np.linspace(-3.0, 7.0, 40)
    y = 1e-6 * x**4 - 2e-3 * x**2 + 0.5 + np.cos(x) * 1e-3
    for degree in (1, 2, 4):
        doc = to_document(fit_series(x, y, model=ModelSpec(degree=degree)).model)
        expected = _definition(doc)
        assert canonical_bytes(doc, written=True) == expected
        assert doc["checksum"] == "sha256:" + hashlib.sha256(expected).hexdigest()
