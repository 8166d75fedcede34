"""The briefing's settings as typed, frozen values: regions, quantities, alert lines, e-mail.

:mod:`forebrief.app.config` fills them from ``forebrief.toml``; the report layer reads them.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field, fields, replace
from pathlib import Path
from typing import Any, Literal

from forebrief.tables.schema import CM_LEVELS

__all__ = [
    "BriefingConfig",
    "EmailConfig",
    "Paper",
    "QuantityInfo",
    "RegionInfo",
    "Threshold",
]

Paper = Literal["A4", "letter"]


@dataclass(frozen=True)
class RegionInfo:
    """A region's display name and population (for rates per 100,000)."""

    id: str
    name: str
    population: float | None = None


@dataclass(frozen=True)
class QuantityInfo:
    """A forecast quantity's display name and unit; ``signed`` quantities may be negative."""

    id: str
    name: str
    unit: str
    signed: bool = False


@dataclass(frozen=True)
class Threshold:
    """An alert line for one region and quantity (for instance a bed-capacity level)."""

    region: str
    quantity: str
    value: float
    label: str = "alert threshold"


@dataclass(frozen=True)
class EmailConfig:
    """Addresses and subject of the e-mail (sending comes later)."""

    sender: str = ""
    to: tuple[str, ...] = ()
    cc: tuple[str, ...] = ()
    subject: str = "{title}: week of {issued}"
    smtp_host: str = ""
    smtp_port: int = 587
    security: Literal["starttls", "ssl", "none"] = "starttls"
    user: str = ""
    password_env: str = "FOREBRIEF_SMTP_PASSWORD"


@dataclass(frozen=True)
class BriefingConfig:
    """Everything the weekly run needs (see the README for each key)."""

    source: Path | None = None
    title: str = "Weekly forecast briefing"
    audience: str = "Public-health leadership"
    jurisdiction: str = "the jurisdiction"
    contact: str = ""
    paper: Paper = "A4"
    templates_dir: Path | None = None
    forecasts: tuple[Path, ...] = ()
    observations: tuple[Path, ...] = ()
    columns: Mapping[str, str] = field(default_factory=dict)
    archive: Path = Path("archive")
    total_region: str | None = None
    regions: Mapping[str, RegionInfo] = field(default_factory=dict)
    quantities: Mapping[str, QuantityInfo] = field(default_factory=dict)
    thresholds: tuple[Threshold, ...] = ()
    window: int = 12
    alpha: float | Literal["auto"] = "auto"
    levels: tuple[float, ...] = CM_LEVELS
    overshoot: float = 0.10
    min_items: int = 6
    power: float = 1.0
    background: Literal["uniform", "log"] = "uniform"
    baseline: str = "persistence"
    horizons: tuple[int, ...] = (1, 2, 3, 4)
    backtest_weeks: int = 12
    settle_weeks: int | Literal["auto"] = "auto"
    nowcast_weeks: int = 12
    headline: str = "auto"
    email: EmailConfig = field(default_factory=EmailConfig)

    @property
    def signed(self) -> tuple[str, ...]:
        return tuple(q.id for q in self.quantities.values() if q.signed)

    def region_name(self, region: str) -> str:
        """The display name; an unconfigured id reads as a name ('north-reach' -> 'North Reach')."""
        info = self.regions.get(region)
        return info.name if info else region.replace("-", " ").replace("_", " ").title()

    def quantity_info(self, quantity: str) -> QuantityInfo:
        name = quantity.replace("_", " ").replace("-", " ")
        return self.quantities.get(quantity) or QuantityInfo(
            quantity, name[:1].upper() + name[1:], name
        )

    def threshold(self, region: str, quantity: str) -> Threshold | None:
        for t in self.thresholds:
            if t.region == region and t.quantity == quantity:
                return t
        return None

    def with_overrides(self, **changes: Any) -> BriefingConfig:
        """A copy with some settings replaced (command-line flags); None leaves a value."""
        return replace(self, **{k: v for k, v in changes.items() if v is not None})

    def as_dict(self) -> dict[str, Any]:
        """The effective configuration as plain data (for the record's manifest)."""

        def plain(value: Any) -> Any:
            if isinstance(value, Path):
                return str(value)
            if isinstance(value, tuple | list):
                return [plain(v) for v in value]
            if isinstance(value, Mapping):
                return {str(k): plain(v) for k, v in value.items()}
            if hasattr(value, "__dataclass_fields__"):
                return {f.name: plain(getattr(value, f.name)) for f in fields(value)}
            return value

        out = plain(self)
        assert isinstance(out, dict)
        email = out.get("email", {})
        email.pop("password_env", None)
        return out
