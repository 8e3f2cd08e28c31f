"""Limits and defaults in one place: built-in defaults -> CURVEWISE_* env -> explicit overrides."""

from __future__ import annotations

import os
from dataclasses import dataclass, fields, replace


@dataclass(frozen=True, slots=True)
class Settings:
    """Service settings. Each field can be set by the env var ``CURVEWISE_<NAME>``."""

    host: str = "127.0.0.1"
    port: int = 8000
    workers: int = 0  # 0: derived from cores at serve time
    max_body_bytes: int = 64 * 1024 * 1024
    max_points: int = 2_000_000          # per series
    max_degree: int = 10
    max_grid_points: int = 20_000
    max_series: int = 100_000            # per batch request
    max_full_series: int = 2_000         # per JSON batch with detail=full (whole reports held)
    max_total_points: int = 10_000_000   # per batch request
    request_timeout: float = 60.0        # seconds of compute per request
    auth_tokens: tuple[str, ...] = ()    # empty: auth off
    auth_exempt: tuple[str, ...] = ("/healthz", "/readyz", "/metrics", "/openapi.json", "/docs")
    cors_origins: tuple[str, ...] = ()   # empty: CORS off
    log_level: str = "INFO"

    @classmethod
    def load(cls, overrides: dict | None = None, environ: dict | None = None) -> Settings:
        """Defaults, then ``CURVEWISE_*`` variables from ``environ``, then ``overrides``."""
        environ = os.environ if environ is None else environ
        values = {}
        for f in fields(cls):
            raw = environ.get(f"CURVEWISE_{f.name.upper()}")
            if raw is not None:
                values[f.name] = _parse(f.name, raw, getattr(cls(), f.name))
        settings = replace(cls(), **values)
        return replace(settings, **(overrides or {}))


def _parse(name: str, raw: str, default):
    try:
        if isinstance(default, bool):
            return raw.strip().lower() in ("1", "true", "yes", "on")
        if isinstance(default, int):
            return int(raw)
        if isinstance(default, float):
            return float(raw)
        if isinstance(default, tuple):
            return tuple(item.strip() for item in raw.split(",") if item.strip())
        return raw
    except ValueError as exc:
        kind = type(default).__name__
        raise SystemExit(f"CURVEWISE_{name.upper()}={raw!r} is not a valid {kind}") from exc
