"""A loaded request body (dicts from the schemas) -> the core's option objects."""

from __future__ import annotations

from service.config import Settings
from service.core.spec import HARD_MAX_DEGREE, FitOptions, GridSpec, ModelSpec


def model_spec(model: dict) -> ModelSpec:
    """ModelSpec from a loaded ``model`` object (the schema of its family)."""
    if model["family"] == "expression":
        return ModelSpec(family="expression", expression=model["expression"],
                         parameters=_pairs(model["parameters"]), lower=_pairs(model["lower"]),
                         upper=_pairs(model["upper"]))
    if "fixed" in model:  # a built-in nonlinear family
        return ModelSpec(family=model["family"], parameters=_pairs(model["parameters"]),
                         lower=_pairs(model["lower"]), upper=_pairs(model["upper"]),
                         fixed=_pairs(model["fixed"]), scale=model.get("scale"))
    return ModelSpec(family=model["family"], degree=model["degree"],
                     max_degree=None if model["degree"] is not None else model["max_degree"],
                     select=model["select"], alpha=model["alpha"], intercept=model["intercept"],
                     transform_x=model["transform_x"], transform_y=model["transform_y"],
                     min_degree=model["min_degree"])


def _pairs(named: dict | None) -> tuple[tuple[str, float], ...] | None:
    """A name -> number object as ordered, hashable pairs (None stays None)."""
    return None if named is None else tuple((k, float(v)) for k, v in named.items())


def grid_spec(grid: dict | None) -> GridSpec | None:
    """GridSpec from a loaded ``grid`` object (None: no grid)."""
    if grid is None:
        return None
    x = grid["x"]
    return GridSpec(count=grid["count"], start=grid["start"], stop=grid["stop"],
                    step=grid["step"], x=None if x is None else tuple(x.tolist()),
                    spacing=grid.get("spacing"))


def fit_options(body: dict, settings: Settings) -> FitOptions:
    """FitOptions from a loaded fit body, with this server's grid limit."""
    return FitOptions(level=body["level"], missing=body["missing"], grid=grid_spec(body["grid"]),
                      include=frozenset(body["include"]),
                      max_grid_points=settings.max_grid_points,
                      weighting=body.get("weighting", "relative"),
                      max_degree=min(settings.max_degree, HARD_MAX_DEGREE))
