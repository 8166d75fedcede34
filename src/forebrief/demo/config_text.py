"""The demo's ``forebrief.toml``, written from the scenario's metadata (pure text, no files)."""

from __future__ import annotations

import json
from collections.abc import Mapping
from typing import Any

__all__ = ["config_toml"]


def _q(text: str) -> str:
    """A TOML basic string (JSON string escaping is valid TOML)."""
    return json.dumps(text, ensure_ascii=False)


def config_toml(meta: Mapping[str, Any]) -> str:
    """A documented configuration for the invented scenario described by ``meta``."""
    j = meta["jurisdiction"].get("short_name") or meta["jurisdiction"]["name"]
    lines = [
        "# forebrief configuration for the invented demo scenario.",
        "# Every name here is invented; paths are relative to this file's folder.",
        "",
        "[briefing]",
        f"title = {_q('Weekly respiratory outlook')}",
        f"audience = {_q('Health Leadership Team')}",
        f"jurisdiction = {_q(j)}",
        f"contact = {_q('Forecasting desk, Health Intelligence Unit (invented)')}",
        'paper = "A4"',
        "",
        "[inputs]",
        "# a folder of per-team submission files (or one file, or a glob pattern)",
        'forecasts = "submissions"',
        "# observations with a 'reported' column: every published vintage is kept",
        'observations = "observations.csv"',
        "",
        "[archive]",
        'folder = "archive"',
        "",
        "[scoring]",
        "window = 12            # weeks of observed targets behind each model's rating",
        'alpha = "auto"         # calibration cutoff, or a number such as 0.05',
        "levels = [0.05, 0.25, 0.5, 0.75, 0.95]",
        "overshoot = 0.10",
        "min_items = 6          # scored targets a model needs before it is rated",
        "power = 1.0            # calibration power (1: every target counts in full)",
        'background = "uniform"',
        'baseline = "persistence"',
        "horizons = [1, 2, 3, 4]",
        "# issue dates back-tested: enough that 8 of them have settled targets 2 weeks ahead",
        "backtest_weeks = 16",
        "# rate models only on weeks that late reports no longer change ('auto': estimated",
        "# from the vintages; 0 scores every week)",
        'settle_weeks = "auto"',
        "",
        "[nowcast]",
        "recent_weeks = 12     # weeks of reporting history behind the chain-ladder factors",
        "",
        "[ensemble]",
        "# 'auto': the median of the models unless another combination did clearly better",
        'headline = "auto"',
        "",
        "[jurisdiction]",
        f"total_region = {_q(meta['total_region'])}",
        "",
    ]
    thresholds: dict[str, list[Mapping[str, Any]]] = {}
    for t in meta.get("thresholds", []):
        thresholds.setdefault(t["region"], []).append(t)
    for r in meta["regions"]:
        lines += [
            f"[regions.{r['id']}]",
            f"name = {_q(r['name'])}",
            f"population = {int(r['population'])}",
        ]
        for t in thresholds.get(r["id"], []):
            lines.append(
                f"thresholds.{t['quantity']} = {{ value = {t['value']:g}, "
                f"label = {_q(t['label'])} }}"
            )
        lines.append("")
    for q in meta["quantities"]:
        name = q["name"][:1].upper() + q["name"][1:].lower()
        lines += [f"[quantities.{q['id']}]", f"name = {_q(name)}", f"unit = {_q(q['unit'])}", ""]
    lines += [
        "[email]",
        f"from = {_q('forecast-desk@health.example')}",
        f"to = [{_q('leadership@health.example')}]",
        f"subject = {_q('{title}: week of {issued}')}",
        'smtp_host = "localhost"',
        "smtp_port = 8025",
        'security = "none"',
        "",
    ]
    return "\n".join(lines)
