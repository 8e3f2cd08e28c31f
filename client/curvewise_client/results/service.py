"""Results of ``POST /v1/plot`` (image bytes) and ``GET /v1/families``."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from curvewise_client.results.base import empty_mapping, items, of, register


@dataclass(frozen=True, slots=True)
class Figure:
    """The answer of ``POST /v1/plot``: image bytes and their media type."""

    content_type: str
    data: bytes

    @property
    def format(self) -> str:
        """``"png"`` or ``"svg"``."""
        return "svg" if "svg" in self.content_type else "png"

    def save(self, path: str | Path) -> Path:
        """Write the image to ``path`` and return it."""
        target = Path(path)
        target.write_bytes(self.data)
        return target


@dataclass(frozen=True, slots=True)
class FamilyOption:
    """One model option of a family: name, JSON type, default, allowed values."""

    name: str
    type: str | None = None
    default: Any = None
    choices: tuple[Any, ...] | None = None
    description: str = ""


@dataclass(frozen=True, slots=True)
class FamilyParameter:
    """One parameter of a built-in family: its meaning (with unit) and constraint."""

    name: str
    meaning: str = ""
    constraint: str = ""


@dataclass(frozen=True, slots=True)
class Reading:
    """What ``POST /v1/invert`` answers for a family's fits, and when."""

    invertible: bool | None = None
    invert_condition: str = ""
    working_range: bool | None = None
    working_range_condition: str = ""
    detection_limit: bool | None = None
    detection_limit_condition: str = ""


@dataclass(frozen=True, slots=True)
class Family:
    """A model family the service fits, with its options."""

    name: str
    description: str = ""
    options: tuple[FamilyOption, ...] = ()
    select_methods: tuple[str, ...] = ()
    transforms: tuple[str, ...] = ()
    equation: str | None = None
    parameters: tuple[FamilyParameter, ...] = ()
    reading: Reading | None = None


@dataclass(frozen=True, slots=True)
class Limits:
    """This server's limits (``None`` when not sent)."""

    max_body_bytes: int | None = None
    max_points: int | None = None
    max_degree: int | None = None
    max_grid_points: int | None = None
    max_series: int | None = None
    max_total_points: int | None = None
    request_timeout: float | None = None


@dataclass(frozen=True, slots=True)
class Families:
    """The answer of ``GET /v1/families``: families, vocabularies, defaults and limits."""

    families: tuple[Family, ...] = ()
    missing_policies: tuple[str, ...] = ()
    sections: tuple[str, ...] = ()
    defaults: Mapping[str, Any] = field(default_factory=empty_mapping)
    limits: Limits | None = None
    raw: Mapping[str, Any] = field(default_factory=empty_mapping)

    def __getitem__(self, name: str) -> Any:
        """The decoded member ``name`` as sent (``families["limits"]["max_degree"]``)."""
        return self.raw[name]



register(Families, families=items(of(Family)), limits=of(Limits))
register(Family, options=items(of(FamilyOption)), parameters=items(of(FamilyParameter)),
         reading=of(Reading))
