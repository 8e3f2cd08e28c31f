"""Results of ``POST /v1/plot`` (image bytes) and ``GET /v1/families``."""

from __future__ import annotations

import base64
from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from curvewise_client.errors import InputError
from curvewise_client.results.base import empty_mapping, items, of, register
from curvewise_client.results.plain import Result


@dataclass(frozen=True, slots=True, repr=False)
class Figure(Result):
    """The answer of ``POST /v1/plot``: image bytes and their media type."""

    content_type: str
    data: bytes
    points_not_drawn: int | None = None
    """With ``x_scale="log"``: points at x <= 0 fitted but not drawn (None otherwise)."""

    @property
    def format(self) -> str:
        """``"png"`` or ``"svg"``."""
        return "svg" if "svg" in self.content_type else "png"

    def save(self, path: str | Path) -> Path:
        """Write the image to ``path`` and return it."""
        target = Path(path)
        target.write_bytes(self.data)
        return target

    def _repr_png_(self) -> bytes | None:
        """Shown inline by notebooks (IPython's display protocol) when the figure is a PNG."""
        return self.data if self.format == "png" else None

    def _repr_svg_(self) -> str | None:
        """Shown inline by notebooks when the figure is an SVG."""
        return self.data.decode("utf-8") if self.format == "svg" else None

    def to_dict(self) -> dict[str, Any]:
        """``{"content_type", "format", "size", "data_base64"}``: the image as plain JSON."""
        return {"content_type": self.content_type, "format": self.format,
                "size": len(self.data), "data_base64": base64.b64encode(self.data).decode()}

    @classmethod
    def from_dict(cls, data: Mapping[str, Any]) -> Figure:
        """Rebuild from :meth:`to_dict` output."""
        try:
            return cls(content_type=str(data["content_type"]),
                       data=base64.b64decode(data["data_base64"], validate=True))
        except (KeyError, TypeError, ValueError) as exc:
            raise InputError("Figure.from_dict needs content_type and data_base64 as written "
                             f"by Figure.to_dict ({type(exc).__name__}: {exc})") from None


@dataclass(frozen=True, slots=True, repr=False)
class FamilyOption(Result):
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


@dataclass(frozen=True, slots=True, repr=False)
class Family(Result):
    """A model family the service fits, with its options."""

    name: str
    description: str = ""
    options: tuple[FamilyOption, ...] = ()
    select_methods: tuple[str, ...] = ()
    transforms: tuple[str, ...] = ()
    equation: str | None = None
    parameters: tuple[FamilyParameter, ...] = ()
    reading: Reading | None = None


@dataclass(frozen=True, slots=True, repr=False)
class Limits(Result):
    """This server's limits (``None`` when not sent)."""

    max_body_bytes: int | None = None
    max_points: int | None = None
    max_degree: int | None = None
    max_grid_points: int | None = None
    max_series: int | None = None
    max_full_series: int | None = None
    max_total_points: int | None = None
    request_timeout: float | None = None


@dataclass(frozen=True, slots=True, repr=False)
class Families(Result):
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
