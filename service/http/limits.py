"""The service's limits (from :class:`service.config.Settings`) applied to a loaded request.

The schemas check shape and types; these checks need the configured limits:
points per series (413), degree and grid size (422). (The compute-time
budget per request is :mod:`service.runtime.guard`'s.)
"""

from __future__ import annotations

import math

from service.config import Settings
from service.http.errors import ServiceLimitError


def check_series(body: dict, settings: Settings, prefix: str = "") -> None:
    """Refuse a loaded fit body that is over a configured limit."""
    n = len(body["x"])
    if n > settings.max_points:
        raise ServiceLimitError(413, "too_many_points",
                                f"The series has {n} points; the limit is {settings.max_points}. "
                                "Split the series, or raise CURVEWISE_MAX_POINTS.",
                                field=prefix + "x")
    model = body["model"]
    for i, candidate in enumerate(model.get("candidates", ())):
        check_degree(candidate, settings, f"{prefix}model.candidates[{i}].")
    check_degree(model, settings, prefix + "model.")
    grid = body.get("grid")
    if grid is not None:
        check_grid(grid, settings, prefix)


def check_grid(grid: dict, settings: Settings, prefix: str = "") -> None:
    """Refuse a loaded grid with more points than the limit (422, field prefix + ``grid``)."""
    points = grid_points(grid)
    if points is not None and points > settings.max_grid_points:
        raise ServiceLimitError(422, "limit_exceeded",
                                f"The grid would have {points} points; the limit is "
                                f"{settings.max_grid_points}. Use a larger step or fewer "
                                "points.", field=prefix + "grid")


def check_degree(model: dict, settings: Settings, prefix: str = "") -> None:
    """Refuse a model whose degree or max_degree is over the limit (422, field prefix + name)."""
    for name in ("degree", "max_degree"):
        value = model.get(name)
        if value is not None and value > settings.max_degree:
            raise ServiceLimitError(422, "limit_exceeded",
                                    f"Degree {value} is over this server's limit of "
                                    f"{settings.max_degree}. Ask for a lower degree.",
                                    field=f"{prefix}{name}")


def grid_points(grid: dict) -> int | None:
    """Number of points a loaded grid asks for (None: decided by the data)."""
    if grid.get("x") is not None:
        return len(grid["x"])
    if grid.get("step") is not None:
        span = (grid["stop"] - grid["start"]) / grid["step"]
        return int(math.floor(span * (1 + 1e-12))) + 1 if math.isfinite(span) else 2**63
    return grid.get("count")
