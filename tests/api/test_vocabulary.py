"""The wire contract repeats the core's vocabularies (it may not import the core): in step."""

from __future__ import annotations

from schemas import common
from service.core import spec


def test_vocabularies_match_the_core():
    assert common.SELECT_METHODS == spec.SELECT_METHODS
    assert common.TRANSFORMS == spec.TRANSFORMS
    assert common.MISSING_POLICIES == spec.MISSING_POLICIES
    assert common.SECTIONS == spec.SECTIONS
    assert common.HARD_MAX_DEGREE == spec.HARD_MAX_DEGREE


def test_families_lists_options_vocabularies_and_limits():
    from service.app import create_app

    client = create_app({"max_degree": 7, "max_points": 1234}).test_client()
    out = client.get("/v1/families").get_json()
    family = out["families"][0]
    assert family["name"] == "polynomial"
    assert family["select_methods"] == list(spec.SELECT_METHODS)
    assert family["transforms"] == list(spec.TRANSFORMS)
    options = {o["name"]: o for o in family["options"]}
    assert set(options) == {"family", "degree", "max_degree", "min_degree", "select", "alpha",
                            "intercept", "transform_x", "transform_y"}
    assert options["alpha"]["default"] == 0.05 and options["intercept"]["type"] == "boolean"
    assert options["select"]["choices"] == list(spec.SELECT_METHODS)
    assert all(o["description"] for o in options.values())
    assert out["limits"]["max_degree"] == 7 and out["limits"]["max_points"] == 1234
    assert out["sections"] == list(spec.SECTIONS)


def test_family_vocabularies_match_the_registry():
    from schemas.builtin import BUILTIN_PARAMETERS, BUILTIN_SCALES
    from schemas.model_field import MODEL_SCHEMAS
    from service.core import families
    from service.core.nonlinear.builtin.catalogue import BUILTINS

    assert common.FAMILIES == tuple(families.FAMILIES)
    assert tuple(MODEL_SCHEMAS) == tuple(families.FAMILIES)
    assert BUILTIN_PARAMETERS == {name: entry.names for name, entry in BUILTINS.items()}
    assert BUILTIN_SCALES == {name: entry.scales for name, entry in BUILTINS.items()
                              if len(entry.scales) > 1}
