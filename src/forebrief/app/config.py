"""The weekly run's configuration: ``forebrief.toml``, read with :mod:`tomllib`.

Every key is documented in the README. An unknown key or a bad value is a
:class:`~forebrief.errors.ConfigError` naming the key, the value and the fix. Paths in the
file are relative to the file's own folder. Command-line flags override the file; with no file
at all the run uses the defaults below.
"""

from __future__ import annotations

import itertools
import math
import tomllib
from collections.abc import Mapping
from dataclasses import fields
from pathlib import Path
from typing import Any, Literal

from forebrief.errors import ConfigError
from forebrief.report.settings import (
    BriefingConfig,
    EmailConfig,
    QuantityInfo,
    RegionInfo,
    Threshold,
)
from forebrief.tables.schema import COMBINATIONS

__all__ = [
    "BriefingConfig",
    "EmailConfig",
    "QuantityInfo",
    "RegionInfo",
    "Threshold",
    "config_from_dict",
    "load_config",
    "parse_config",
]

# --------------------------------------------------------------------------------------------
# parsing

_SECTIONS = {
    "briefing": {"title", "audience", "jurisdiction", "contact", "paper", "templates_dir"},
    "inputs": {"forecasts", "observations", "columns"},
    "archive": {"folder"},
    "scoring": {
        "window",
        "alpha",
        "levels",
        "overshoot",
        "min_items",
        "power",
        "background",
        "baseline",
        "horizons",
        "backtest_weeks",
        "settle_weeks",
    },
    "nowcast": {"recent_weeks"},
    "ensemble": {"headline"},
    "jurisdiction": {"total_region"},
    "regions": None,  # free keys: region ids
    "quantities": None,  # free keys: quantity ids
    "email": {
        "from",
        "to",
        "cc",
        "subject",
        "smtp_host",
        "smtp_port",
        "security",
        "user",
        "password_env",
    },
}


def _where(source: Path | None) -> str:
    return str(source) if source else "configuration"


def _err(source: Path | None, key: str, problem: str, fix: str) -> ConfigError:
    return ConfigError(f"{_where(source)}: key {key!r}: {problem}; fix: {fix}")


def _string(value: Any, key: str, source: Path | None, *, empty_ok: bool = False) -> str:
    if not isinstance(value, str) or (not empty_ok and not value.strip()):
        raise _err(
            source,
            key,
            f"must be a non-empty text; got {value!r}",
            f'write it in quotes, e.g. {key.split(".")[-1]} = "..."',
        )
    return value


def _number(
    value: Any,
    key: str,
    source: Path | None,
    *,
    low: float | None = None,
    high: float | None = None,
    integer: bool = False,
) -> float:
    ok = (
        isinstance(value, int | float)
        and not isinstance(value, bool)
        and math.isfinite(float(value))
    )
    if ok and integer and not float(value).is_integer():
        ok = False
    if ok and low is not None and value < low:
        ok = False
    if ok and high is not None and value > high:
        ok = False
    if not ok:
        kind = "a whole number" if integer else "a number"
        bounds = ""
        if low is not None and high is not None:
            bounds = f" between {low:g} and {high:g}"
        elif low is not None:
            bounds = f" of at least {low:g}"
        raise _err(
            source,
            key,
            f"must be {kind}{bounds}; got {value!r}",
            f"write for example {key.split('.')[-1]} = {low if low is not None else 1:g}",
        )
    return float(value)


def _paths(value: Any, key: str, base: Path, source: Path | None) -> tuple[Path, ...]:
    items = value if isinstance(value, list) else [value]
    out = []
    for v in items:
        text = _string(v, key, source)
        p = Path(text).expanduser()
        out.append(p if p.is_absolute() else base / p)
    return tuple(out)


def parse_config(
    data: Mapping[str, Any], *, source: Path | None = None, base: Path | None = None
) -> BriefingConfig:
    """Build a :class:`BriefingConfig` from parsed TOML, checking every key."""
    base = base or (source.parent if source else Path.cwd())
    for section, value in data.items():
        if section not in _SECTIONS:
            raise _err(
                source,
                section,
                "is not a known section",
                "use one of " + ", ".join(f"[{s}]" for s in _SECTIONS),
            )
        if not isinstance(value, Mapping):
            raise _err(
                source,
                section,
                f"must be a table ([{section}]); got {value!r}",
                f"put its keys under a [{section}] heading",
            )
        allowed = _SECTIONS[section]
        if allowed is not None:
            for key in value:
                if key not in allowed:
                    raise _err(
                        source,
                        f"{section}.{key}",
                        "is not a known key",
                        f"use one of {', '.join(sorted(allowed))} in [{section}]",
                    )
    cfg: dict[str, Any] = {"source": source}
    b = data.get("briefing", {})
    for key in ("title", "audience", "jurisdiction"):
        if key in b:
            cfg[key] = _string(b[key], f"briefing.{key}", source)
    if "contact" in b:
        cfg["contact"] = _string(b["contact"], "briefing.contact", source, empty_ok=True)
    if "paper" in b:
        if b["paper"] not in ("A4", "letter"):
            raise _err(
                source,
                "briefing.paper",
                f"must be 'A4' or 'letter'; got {b['paper']!r}",
                'write paper = "A4" or paper = "letter"',
            )
        cfg["paper"] = b["paper"]
    if "templates_dir" in b:
        cfg["templates_dir"] = _paths(b["templates_dir"], "briefing.templates_dir", base, source)[0]
    i = data.get("inputs", {})
    if "forecasts" in i:
        cfg["forecasts"] = _paths(i["forecasts"], "inputs.forecasts", base, source)
    if "observations" in i:
        cfg["observations"] = _paths(i["observations"], "inputs.observations", base, source)
    if "columns" in i:
        cols = i["columns"]
        if not isinstance(cols, Mapping) or not all(isinstance(v, str) for v in cols.values()):
            raise _err(
                source,
                "inputs.columns",
                f"must map our column names to yours; got {cols!r}",
                'write columns = { value = "quantile_value" }',
            )
        cfg["columns"] = {str(theirs): str(ours) for ours, theirs in cols.items()}
    a = data.get("archive", {})
    # the default archive folder sits beside the configuration file (README: [archive])
    cfg["archive"] = _paths(a.get("folder", "archive"), "archive.folder", base, source)[0]
    _parse_scoring(data.get("scoring", {}), cfg, source)
    n = data.get("nowcast", {})
    if "recent_weeks" in n:
        cfg["nowcast_weeks"] = int(
            _number(n["recent_weeks"], "nowcast.recent_weeks", source, low=2, integer=True)
        )
    e = data.get("ensemble", {})
    if "headline" in e:
        cfg["headline"] = check_headline(e["headline"], key="ensemble.headline", source=source)
    regions = {}
    for rid, r in data.get("regions", {}).items():
        key = f"regions.{rid}"
        if not isinstance(r, Mapping):
            raise _err(
                source,
                key,
                f"must be a table; got {r!r}",
                f'write [regions.{rid}] with name = "..." and population = ...',
            )
        for k in r:
            if k not in ("name", "population", "thresholds"):
                raise _err(
                    source, f"{key}.{k}", "is not a known key", "use name, population or thresholds"
                )
        pop = None
        if "population" in r:
            pop = _number(r["population"], f"{key}.population", source, low=1)
        regions[rid] = RegionInfo(rid, _string(r.get("name", rid), f"{key}.name", source), pop)
        thresholds = r.get("thresholds", {})
        if not isinstance(thresholds, Mapping):
            raise _err(
                source,
                f"{key}.thresholds",
                f"must be a table of quantities; got {thresholds!r}",
                f"write thresholds.admissions = 300 under [regions.{rid}]",
            )
        for q, t in thresholds.items():
            tkey = f"{key}.thresholds.{q}"
            if isinstance(t, Mapping):
                for k in t:
                    if k not in ("value", "label"):
                        raise _err(
                            source, f"{tkey}.{k}", "is not a known key", "use value and label"
                        )
                value = _number(t.get("value"), f"{tkey}.value", source)
                label = _string(t.get("label", "alert threshold"), f"{tkey}.label", source)
            else:
                value, label = _number(t, tkey, source), "alert threshold"
            cfg.setdefault("thresholds", []).append(Threshold(rid, q, value, label))
    cfg["regions"] = regions
    if "thresholds" in cfg:
        cfg["thresholds"] = tuple(cfg["thresholds"])
    quantities = {}
    for qid, q in data.get("quantities", {}).items():
        key = f"quantities.{qid}"
        if not isinstance(q, Mapping):
            raise _err(
                source,
                key,
                f"must be a table; got {q!r}",
                f'write [quantities.{qid}] with name = "..." and unit = "..."',
            )
        for k in q:
            if k not in ("name", "unit", "signed"):
                raise _err(source, f"{key}.{k}", "is not a known key", "use name, unit or signed")
        signed = q.get("signed", False)
        if not isinstance(signed, bool):
            raise _err(
                source,
                f"{key}.signed",
                f"must be true or false; got {signed!r}",
                "write signed = true only for quantities that can be negative",
            )
        quantities[qid] = QuantityInfo(
            qid,
            _string(q.get("name", qid), f"{key}.name", source),
            _string(q.get("unit", qid), f"{key}.unit", source),
            signed,
        )
    cfg["quantities"] = quantities
    j = data.get("jurisdiction", {})
    if "total_region" in j:
        total = _string(j["total_region"], "jurisdiction.total_region", source)
        if regions and total not in regions:
            raise _err(
                source,
                "jurisdiction.total_region",
                f"names region {total!r}, which has no [regions.{total}] table",
                "add the region, or correct the id",
            )
        cfg["total_region"] = total
    if "email" in data:
        cfg["email"] = _parse_email(data["email"], source)
    return BriefingConfig(**cfg)


def _parse_scoring(s: Mapping[str, Any], cfg: dict[str, Any], source: Path | None) -> None:
    if "window" in s:
        cfg["window"] = int(_number(s["window"], "scoring.window", source, low=1, integer=True))
    if "alpha" in s:
        if s["alpha"] == "auto":
            cfg["alpha"] = "auto"
        else:
            cfg["alpha"] = _number(s["alpha"], "scoring.alpha", source, low=0, high=1)
    if "levels" in s:
        lv = s["levels"]
        if not isinstance(lv, list) or not lv:
            raise _err(
                source,
                "scoring.levels",
                f"must be a list of levels; got {lv!r}",
                "write levels = [0.05, 0.25, 0.5, 0.75, 0.95]",
            )
        vals = tuple(_number(v, "scoring.levels", source, low=0, high=1) for v in lv)
        if any(b <= a for a, b in itertools.pairwise(vals)) or vals[0] <= 0 or vals[-1] >= 1:
            raise _err(
                source,
                "scoring.levels",
                f"must rise strictly inside (0, 1); got {lv!r}",
                "write levels = [0.05, 0.25, 0.5, 0.75, 0.95]",
            )
        cfg["levels"] = vals
    if "overshoot" in s:
        cfg["overshoot"] = _number(s["overshoot"], "scoring.overshoot", source, low=0)
    if "min_items" in s:
        cfg["min_items"] = int(
            _number(s["min_items"], "scoring.min_items", source, low=0, integer=True)
        )
    if "power" in s:
        p = _number(s["power"], "scoring.power", source, low=0, high=1)
        if p == 0:
            raise _err(source, "scoring.power", "must be above 0", "write power = 1, or 0.25")
        cfg["power"] = p
    if "background" in s:
        if s["background"] not in ("uniform", "log"):
            raise _err(
                source,
                "scoring.background",
                f"must be 'uniform' or 'log'; got {s['background']!r}",
                'write background = "uniform"',
            )
        cfg["background"] = s["background"]
    if "baseline" in s:
        cfg["baseline"] = _string(s["baseline"], "scoring.baseline", source)
    if "horizons" in s:
        h = s["horizons"]
        if not isinstance(h, list) or not h:
            raise _err(
                source,
                "scoring.horizons",
                f"must be a list of weeks ahead; got {h!r}",
                "write horizons = [1, 2, 3, 4]",
            )
        cfg["horizons"] = tuple(
            sorted({int(_number(v, "scoring.horizons", source, low=1, integer=True)) for v in h})
        )
    if "settle_weeks" in s:
        cfg["settle_weeks"] = check_settle_weeks(
            s["settle_weeks"], key="scoring.settle_weeks", source=source
        )
    if "backtest_weeks" in s:
        cfg["backtest_weeks"] = int(
            _number(s["backtest_weeks"], "scoring.backtest_weeks", source, low=1, integer=True)
        )


#: Combinations the headline may use ("auto" applies the rule of :mod:`forebrief.tables.compare`).
HEADLINE_METHODS: tuple[str, ...] = COMBINATIONS


def check_headline(
    value: Any, *, key: str = "ensemble.headline", source: Path | None = None
) -> str:
    """'auto' or one combination's name; anything else names the valid choices."""
    if value == "auto" or value in HEADLINE_METHODS:
        return str(value)
    choices = ", ".join(repr(m) for m in ("auto", *HEADLINE_METHODS))
    raise _err(source, key, f"must be one of {choices}; got {value!r}", 'write headline = "auto"')


def check_settle_weeks(
    value: Any, *, key: str = "scoring.settle_weeks", source: Path | None = None
) -> int | Literal["auto"]:
    """'auto' (estimated from the vintages) or a whole number of weeks >= 0."""
    if value == "auto":
        return "auto"
    if isinstance(value, str):
        try:
            value = int(value)
        except ValueError:
            raise _err(
                source,
                key,
                f"must be 'auto' or a whole number of weeks >= 0; got {value!r}",
                'write settle_weeks = "auto", or 0 to score every week',
            ) from None
    return int(_number(value, key, source, low=0, integer=True))


def _parse_email(e: Mapping[str, Any], source: Path | None) -> EmailConfig:
    out: dict[str, Any] = {}

    def addresses(key: str) -> tuple[str, ...]:
        v = e[key]
        items = v if isinstance(v, list) else [v]
        return tuple(_string(x, f"email.{key}", source) for x in items)

    if "from" in e:
        out["sender"] = _string(e["from"], "email.from", source)
    for key in ("to", "cc"):
        if key in e:
            out[key] = addresses(key)
    for key in ("subject", "smtp_host", "user", "password_env"):
        if key in e:
            out[key] = _string(e[key], f"email.{key}", source)
    if "smtp_port" in e:
        out["smtp_port"] = int(
            _number(e["smtp_port"], "email.smtp_port", source, low=1, high=65535, integer=True)
        )
    if "security" in e:
        if e["security"] not in ("starttls", "ssl", "none"):
            raise _err(
                source,
                "email.security",
                f"must be 'starttls', 'ssl' or 'none'; got {e['security']!r}",
                'write security = "starttls"',
            )
        out["security"] = e["security"]
    return EmailConfig(**out)


def load_config(path: Path) -> BriefingConfig:
    """Read and check ``forebrief.toml``."""
    try:
        with path.open("rb") as fh:
            data = tomllib.load(fh)
    except FileNotFoundError:
        raise ConfigError(
            f"{path}: no such configuration file; fix: check the path, or run "
            "without --config to use the defaults"
        ) from None
    except tomllib.TOMLDecodeError as exc:
        raise ConfigError(f"{path}: not valid TOML ({exc}); fix: correct the line named") from None
    return parse_config(data, source=path.resolve())


def config_from_dict(data: Mapping[str, Any]) -> BriefingConfig:
    """Rebuild a configuration from :meth:`BriefingConfig.as_dict` (a record's manifest)."""
    d = dict(data)
    out: dict[str, Any] = {}
    for f in fields(BriefingConfig):
        if f.name not in d:
            continue
        v = d[f.name]
        if f.name in ("source", "templates_dir"):
            out[f.name] = None if v is None else Path(v)
        elif f.name == "archive":
            out[f.name] = Path(v)
        elif f.name in ("forecasts", "observations"):
            out[f.name] = tuple(Path(p) for p in v)
        elif f.name in ("levels",):
            out[f.name] = tuple(float(x) for x in v)
        elif f.name == "horizons":
            out[f.name] = tuple(int(x) for x in v)
        elif f.name == "regions":
            out[f.name] = {k: RegionInfo(**r) for k, r in v.items()}
        elif f.name == "quantities":
            out[f.name] = {k: QuantityInfo(**q) for k, q in v.items()}
        elif f.name == "thresholds":
            out[f.name] = tuple(Threshold(**t) for t in v)
        elif f.name == "email":
            e = dict(v)
            for key in ("to", "cc"):
                e[key] = tuple(e.get(key, ()))
            out[f.name] = EmailConfig(**e)
        elif f.name == "columns":
            out[f.name] = dict(v)
        else:
            out[f.name] = v
    return BriefingConfig(**out)
