"""The briefing as HTML (Jinja2, autoescaped): self-contained, for screen and for print.

The view model built here only selects and arranges values that the facts already hold as
text; every number was computed and formatted in :mod:`forebrief.report.facts`.
"""

from __future__ import annotations

import base64
import struct
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Literal

import jinja2

from forebrief.report.facts import BriefingFacts
from forebrief.report.narrative import Narrative
from forebrief.report.resources import template_root

__all__ = ["FigureView", "render_html", "template_environment"]

#: CSS pixels per inch, and the dpi the PNG charts are drawn at.
_CSS_DPI = 96
_SECTION_OF = {
    "outlook": "outlook",
    "fan": "outlook",
    "reliability": "trust",
    "weights": "trust",
    "track": "track",
}


@dataclass(frozen=True)
class FigureView:
    """A chart as the templates place it."""

    key: str
    section: str
    title: str
    caption: str
    alt: str
    src: str
    width_px: int
    height_px: int
    wide: bool = False
    #: The figure kind, the key's first part (``fan``, ``outlook``, ...), for the CSS class.
    kind: str = ""
    #: The quantity id the figure belongs to ("" when the key names none of them).
    quantity: str = ""
    #: Taller than wide (a grid of many regions): print lets it fill a page, not a band.
    tall: bool = False


def _png_size(png: bytes) -> tuple[int, int]:
    if png[:8] != b"\x89PNG\r\n\x1a\n":
        raise ValueError("not a PNG image")
    w, h = struct.unpack(">II", png[16:24])
    return int(w), int(h)


#: Figure kinds the printed briefing keeps, for the lead quantity only (to stay within a few
#: pages); the screen version shows every figure.
PRINT_KINDS = ("fan", "outlook", "reliability", "track")


def _quantity_of(rest: str, quantities: Sequence[str]) -> str:
    """The quantity a key's remainder (``<quantity>`` or ``<quantity>_<region>``) names;
    the longest match wins, so ``beds`` and ``beds_icu`` are told apart."""
    hits = [q for q in quantities if rest == q or rest.startswith(q + "_")]
    return max(hits, key=len) if hits else ""


def figure_views(
    charts: Sequence[Any],
    *,
    images: Literal["png", "svg"] = "png",
    dpi: int = 200,
    only_quantity: str | None = None,
    quantities: Sequence[str] = (),
) -> list[FigureView]:
    """Turn chart specs (key, title, caption, alt, png, svg) into embeddable figures.

    With ``only_quantity`` (the printed briefing) only the lead quantity's figures of the
    kinds in :data:`PRINT_KINDS` are kept. ``quantities`` (the quantity ids) lets each figure
    name its quantity, so the templates can place it beside that quantity's table.
    """
    out = []
    for c in charts:
        kind, _, rest = c.key.partition("_")
        if only_quantity is not None and (
            kind not in PRINT_KINDS
            or not (rest == only_quantity or rest.startswith(only_quantity + "_"))
        ):
            continue
        w, h = _png_size(c.png)
        if images == "svg":
            src = "data:image/svg+xml;base64," + base64.b64encode(c.svg.encode("utf-8")).decode()
        else:
            src = "data:image/png;base64," + base64.b64encode(c.png).decode()
        prefix = c.key.split("_")[0].split(":")[0]
        out.append(
            FigureView(
                key=c.key,
                section=getattr(c, "section", None) or _SECTION_OF.get(prefix, "outlook"),
                title=c.title,
                caption=c.caption,
                alt=c.alt,
                src=src,
                width_px=round(w * _CSS_DPI / dpi),
                height_px=round(h * _CSS_DPI / dpi),
                wide=getattr(c, "wide", False),
                kind=prefix,
                quantity=_quantity_of(rest, quantities),
                tall=h > w,
            )
        )
    return out


def template_environment(templates_dir: Path | None = None) -> jinja2.Environment:
    """Jinja2 with autoescaping on; an agency's ``templates_dir`` overrides shipped files.

    Shipped templates are also reachable as ``forebrief/<name>``, so an override can
    ``{% extends "forebrief/briefing.html.j2" %}`` and replace a single block.
    """
    shipped = jinja2.FileSystemLoader(str(template_root()))
    loaders: list[jinja2.BaseLoader] = []
    if templates_dir is not None:
        from forebrief.errors import ConfigError

        if not Path(templates_dir).is_dir():
            raise ConfigError(
                f"templates_dir {templates_dir}: no such folder; fix: point "
                "[briefing] templates_dir at a folder of templates, or remove it"
            )
        loaders.append(jinja2.FileSystemLoader(str(templates_dir)))
    loaders.append(jinja2.PrefixLoader({"forebrief": shipped}))
    loaders.append(shipped)
    return jinja2.Environment(
        loader=jinja2.ChoiceLoader(loaders),
        autoescape=True,
        undefined=jinja2.StrictUndefined,
        trim_blocks=True,
        lstrip_blocks=True,
        keep_trailing_newline=True,
    )


def _horizon_label(h: int) -> str:
    return "Next week" if h == 1 else f"{h} weeks ahead"


def _outlook_tables(facts: BriefingFacts) -> list[dict[str, Any]]:
    tables = []
    first = min(facts.horizons) if facts.horizons else 1
    for q in facts.quantities:
        rows_q = [o for o in facts.outlook if o.quantity == q["id"]]
        if not rows_q:
            continue
        horizons = sorted({o.horizon for o in rows_q})
        weeks = {o.horizon: o.week_ending_text for o in rows_q}
        rows = []
        for r in facts.regions:
            cells = {o.horizon: o for o in rows_q if o.region == r["id"]}
            if not cells:
                continue
            lead = cells.get(first) or next(iter(cells.values()))
            thr = lead.p_above_threshold_text
            rows.append(
                {
                    "region_name": r["name"],
                    "is_total": r["is_total"],
                    "last_value_text": lead.last_value_text,
                    "last_provisional": lead.last_provisional,
                    "last_nowcast_text": lead.last_value_nowcast_text,
                    "cells": [cells[h] for h in horizons if h in cells],
                    "threshold_cell": (
                        f"{thr} (line: {lead.threshold_text})" if thr else "no alert line set"
                    ),
                }
            )
        tables.append(
            {
                "quantity": q["id"],
                "caption": f"{q['name']} ({q['unit']}): "
                f"{(rows_q[0].method_label if rows_q else '') or 'combined forecast'} by region",
                "horizons": [
                    {"label": _horizon_label(h), "week": f"week ending {weeks[h]}"}
                    for h in horizons
                ],
                "rows": rows,
            }
        )
    return tables


_VERDICT_CLASS = {"reliable": "reliable", "not yet rated": "unrated"}


def _trust_table(facts: BriefingFacts) -> dict[str, Any]:
    """One row per model, one group of cells per quantity: verdict, weight, relative error."""
    quantities = [q for q in facts.quantities if any(v.quantity == q["id"] for v in facts.verdicts)]
    models: list[str] = []
    for v in facts.verdicts:
        if v.model not in models:
            models.append(v.model)
    by_key = {(v.model, v.quantity): v for v in facts.verdicts}
    rows = []
    for m in models:
        cells = []
        for q in quantities:
            found = by_key.get((m, q["id"]))
            cells.append(
                None
                if found is None
                else {
                    **found.__dict__,
                    "verdict_class": _VERDICT_CLASS.get(found.verdict, "warning"),
                }
            )
        rows.append({"model": m, "cells": cells})
    lead = facts.summary.get("lead_quantity")
    why = [v for v in facts.verdicts if v.quantity == lead]
    return {
        "caption": "Each model's recent record: verdict, weight next week, and error "
        'relative to "same as last week"',
        "quantities": [q["name"] for q in quantities],
        "rows": rows,
        "why_title": next((q["name"] for q in quantities if q["id"] == lead), ""),
        "why": why,
    }


def _track_table(facts: BriefingFacts) -> dict[str, Any]:
    first = min(facts.horizons) if facts.horizons else 1
    order = {"weighted_pool": 0, "equal_pool": 1, "quantile_median": 2}
    names = {q["id"]: q["name"] for q in facts.quantities}
    rows = sorted(
        (t for t in facts.track if t.horizon == first),
        key=lambda t: (t.quantity, order.get(t.method, 9)),
    )
    return {
        "caption": f"Next-week forecasts over the last {facts.track_weeks} issue dates",
        "rows": [{**t.__dict__, "quantity_name": names.get(t.quantity, t.quantity)} for t in rows],
    }


def render_html(
    facts: BriefingFacts,
    narrative: Narrative,
    charts: Sequence[Any] = (),
    *,
    templates_dir: Path | None = None,
    for_print: bool = False,
    paper: str = "A4",
    images: Literal["png", "svg"] = "png",
    template: str = "briefing.html.j2",
) -> str:
    """The briefing as one self-contained HTML document (images embedded as data URIs)."""
    env = template_environment(templates_dir)
    sections = {s.key: s for s in narrative.sections}
    return env.get_template(template).render(
        facts=facts,
        narrative=narrative,
        sections=sections,
        outlook_tables=_outlook_tables(facts),
        trust=_trust_table(facts),
        track_table=_track_table(facts),
        charts=figure_views(
            charts,
            images=images,
            only_quantity=facts.summary.get("lead_quantity") if for_print else None,
            quantities=[str(q["id"]) for q in facts.quantities],
        ),
        for_print=for_print,
        paper="letter" if paper == "letter" else "A4",
    )
