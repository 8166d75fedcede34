"""The briefing's charts (matplotlib, Agg, Figure API): facts in, Axes out.

Every plot function takes the :class:`~forebrief.report.facts.BriefingFacts` and draws on ``ax`` (or
on a new :class:`~matplotlib.figure.Figure` when ``ax`` is None) and returns that Axes; the
report code owns the figures and closes them. Nothing here computes a statistic: every value
drawn or written is one the facts already hold (rounded values are fine for a chart). Beyond
that, only display choices are made here (axis limits, label positions).

The look is our own and is defined once, below: one colour per method from the Okabe-Ito
palette (Okabe & Ito 2008, "Color Universal Design"), line style and marker as well as
colour for every series, left-aligned bold panel titles, a light horizontal grid, DejaVu Sans
(ships with matplotlib, so the SVG text and the PDF font agree), sizes that fit an A4 column
6.85 in wide (docs/conventions.md §3).

Exports are reproducible: :func:`figure_svg` writes real ``<text>`` (``svg.fonttype="none"``),
no date and a fixed ``svg.hashsalt``; :func:`figure_png` writes no Software tag. Two renders
of the same facts are byte-identical. :func:`briefing_figures` returns every figure the
briefing needs as :class:`ChartSpec` records, so the renderer only places them.

Cost: each chart is O(points drawn); the whole demo set (7 regions, 2 quantities, SVG + PNG)
renders in a few seconds on one core.
"""

from __future__ import annotations

import io
import sys
import textwrap
from collections.abc import Iterator, Mapping, Sequence
from contextlib import contextmanager
from dataclasses import dataclass, field
from typing import Any, Literal

import matplotlib
import matplotlib.colors as mcolors
import numpy as np
from matplotlib import dates as mdates
from matplotlib.axes import Axes
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure
from matplotlib.lines import Line2D
from matplotlib.patches import Patch
from matplotlib.text import Text
from matplotlib.ticker import FixedLocator, FuncFormatter, MaxNLocator, NullLocator

from forebrief.report.facts import BriefingFacts, ModelVerdict, OutlookRow, TrackRow

__all__ = [
    "CIVIDIS_STOPS",
    "COLUMN_WIDTH",
    "OKABE_ITO",
    "PALETTE",
    "ChartSpec",
    "briefing_figures",
    "coverage_chart",
    "email_figures",
    "fan_alt_text",
    "fan_chart",
    "figure_png",
    "figure_svg",
    "horizon_colors",
    "outlook_alt_text",
    "outlook_grid",
    "reliability_alt_text",
    "reliability_chart",
    "track_alt_text",
    "track_chart",
    "track_figure",
    "weights_alt_text",
    "weights_chart",
]

# --------------------------------------------------------------------------------------------
# visual identity (defined once)

#: The eight Okabe-Ito colours in their published order (Okabe & Ito 2008, "Color Universal
#: Design"). matplotlib >= 3.11 ships them as the ``okabe_ito`` colour sequence; older versions
#: get these hex values.
_OKABE_ITO_NAMES = (
    "black",
    "orange",
    "sky blue",
    "bluish green",
    "yellow",
    "blue",
    "vermillion",
    "reddish purple",
)
_OKABE_ITO_HEX = (
    "#000000",
    "#e69f00",
    "#56b4e9",
    "#009e73",
    "#f0e442",
    "#0072b2",
    "#d55e00",
    "#cc79a7",
)


def _okabe_ito() -> dict[str, str]:
    seq = (
        matplotlib.color_sequences.get("okabe_ito")
        if hasattr(matplotlib, "color_sequences")
        else None
    )
    values = (
        [mcolors.to_hex(c) for c in seq]
        if seq is not None and len(seq) == 8
        else list(_OKABE_ITO_HEX)
    )
    return dict(zip(_OKABE_ITO_NAMES, values, strict=True))


OKABE_ITO: Mapping[str, str] = _okabe_ito()

#: What each colour means, in every chart of the briefing.
PALETTE: Mapping[str, str] = {
    "weighted_pool": OKABE_ITO["blue"],
    "equal_pool": OKABE_ITO["bluish green"],
    "quantile_median": OKABE_ITO["orange"],
    "recalibrated_pool": OKABE_ITO["sky blue"],
    "baseline": OKABE_ITO["reddish purple"],
    "observed": OKABE_ITO["black"],
    "threshold": OKABE_ITO["vermillion"],
    "cutoff": OKABE_ITO["black"],
}

#: Line style and marker per method, so no series is told apart by colour alone.
_METHOD_STYLE: Mapping[str, tuple[str, str]] = {
    "weighted_pool": ("-", "o"),
    "equal_pool": ("--", "s"),
    "quantile_median": ("-.", "D"),
    "recalibrated_pool": ("-", "v"),
    "baseline": (":", "^"),
}
_METHOD_ORDER = ("weighted_pool", "equal_pool", "quantile_median", "recalibrated_pool")

#: Marker and colour per verdict (reliability chart).
_VERDICT_STYLE: Mapping[str, tuple[str, str, bool]] = {
    "reliable": ("o", OKABE_ITO["bluish green"], True),
    "overconfident": ("D", OKABE_ITO["vermillion"], True),
    "underconfident": ("s", OKABE_ITO["sky blue"], True),
    "biased high": ("^", OKABE_ITO["orange"], True),
    "biased low": ("v", OKABE_ITO["reddish purple"], True),
    "unreliable": ("X", OKABE_ITO["black"], True),
    "not yet rated": ("o", OKABE_ITO["black"], False),
}

#: Horizons (ordered) take evenly spaced stops of cividis, designed for colour-vision
#: deficiency (Nuñez, Anderton & Renslow 2018, PLOS ONE 13:e0199239); the light yellow end
#: is left out because it vanishes on white paper.
CIVIDIS_STOPS = (0.05, 0.35, 0.6, 0.82)

#: Neutral inks for text, axes and grid (not data colours).
INK = "#222222"
INK_SOFT = "#5a5a5a"
GRID = "#dcdcdc"

#: A4 portrait, 18 mm side margins: 174 mm = 6.85 in (docs/conventions.md §3).
COLUMN_WIDTH = 6.85
FAN_SIZE = (COLUMN_WIDTH, 3.4)
PANEL_HEIGHT = 1.8
RELIABILITY_SIZE = (COLUMN_WIDTH, 4.2)
TRACK_SIZE = (COLUMN_WIDTH, 5.6)
#: The e-mail's fan chart: shown about 552 px wide, so drawn narrower with larger text
#: (8 pt labels on a 6.85 in figure come out near 9 px there; common practice, no source).
#: The legend sits below the axes, hence the extra height.
EMAIL_FAN_SIZE = (5.5, 3.8)
EMAIL_TEXT_SCALE = 1.25

_SVG_HASHSALT = "forebrief-charts"
_FONT = "DejaVu Sans"
_STYLE: Mapping[str, Any] = {
    "font.family": "sans-serif",
    "font.sans-serif": [_FONT],
    "font.size": 8.0,
    "axes.titlesize": 9.0,
    "axes.titleweight": "bold",
    "axes.titlelocation": "left",
    "axes.titlepad": 5.0,
    "axes.labelsize": 8.0,
    "axes.labelcolor": INK,
    "axes.edgecolor": INK_SOFT,
    "axes.linewidth": 0.7,
    "axes.spines.top": False,
    "axes.spines.right": False,
    "axes.axisbelow": True,
    "axes.grid": True,
    "axes.grid.axis": "y",
    "grid.color": GRID,
    "grid.linewidth": 0.6,
    "xtick.labelsize": 7.5,
    "ytick.labelsize": 7.5,
    "xtick.color": INK_SOFT,
    "ytick.color": INK_SOFT,
    "xtick.labelcolor": INK,
    "ytick.labelcolor": INK,
    "text.color": INK,
    "legend.fontsize": 7.5,
    "legend.frameon": False,
    "legend.handlelength": 2.4,
    "figure.facecolor": "white",
    "axes.facecolor": "white",
    "savefig.facecolor": "white",
    "svg.fonttype": "none",
    "svg.hashsalt": _SVG_HASHSALT,
}


def horizon_colors(horizons: Sequence[int]) -> dict[int, str]:
    """One cividis colour per horizon (ordered, darkest first)."""
    cmap = matplotlib.colormaps["cividis"]
    stops = (
        CIVIDIS_STOPS
        if len(horizons) <= len(CIVIDIS_STOPS)
        else np.linspace(0.05, 0.85, len(horizons))
    )
    return {h: mcolors.to_hex(cmap(s)) for h, s in zip(sorted(horizons), stops, strict=False)}


@contextmanager
def _style() -> Iterator[None]:
    with matplotlib.rc_context(dict(_STYLE)):  # type: ignore[arg-type]
        yield


def _new_axes(size: tuple[float, float]) -> Axes:
    fig = Figure(figsize=size, layout="constrained")
    FigureCanvasAgg(fig)
    return fig.add_subplot()


def _style_axes(ax: Axes, *, grid_axis: Literal["both", "x", "y"] = "y") -> None:
    """Apply the house look to an Axes the caller may have made outside our rc settings."""
    for side in ("top", "right"):
        ax.spines[side].set_visible(False)
    for side in ("left", "bottom"):
        ax.spines[side].set_color(INK_SOFT)
        ax.spines[side].set_linewidth(0.7)
    ax.set_axisbelow(True)
    ax.grid(False)
    ax.grid(True, axis=grid_axis, color=GRID, linewidth=0.6)
    ax.tick_params(colors=INK_SOFT, labelcolor=INK, labelsize=7.5)


def _lower_first(name: str) -> str:
    """'Hospital admissions' -> 'hospital admissions'; acronyms ('ICU beds') stay."""
    return name[:1].lower() + name[1:] if name[1:2].islower() else name


def _dates(values: Sequence[str]) -> np.ndarray:
    return np.array(list(values), dtype="datetime64[D]")


def _quantity_ids(facts: BriefingFacts) -> list[str]:
    return [str(q["id"]) for q in facts.quantities]


def _check_quantity(facts: BriefingFacts, quantity: str) -> None:
    ids = _quantity_ids(facts)
    if quantity not in ids:
        raise ValueError(
            f"quantity must be one of {', '.join(repr(i) for i in ids)}; got {quantity!r}"
        )


def _quantity_info(facts: BriefingFacts, quantity: str) -> Mapping[str, str]:
    _check_quantity(facts, quantity)
    return next(q for q in facts.quantities if q["id"] == quantity)


def _outlook_rows(
    facts: BriefingFacts, region: str, quantity: str, horizons: Sequence[int] | None = None
) -> list[OutlookRow]:
    _check_quantity(facts, quantity)
    rows = [
        o
        for o in facts.outlook
        if o.region == region
        and o.quantity == quantity
        and (horizons is None or o.horizon in horizons)
    ]
    if not rows:
        have = sorted({o.region for o in facts.outlook if o.quantity == quantity})
        raise ValueError(
            f"region must be one of {', '.join(repr(r) for r in have)} for "
            f"quantity {quantity!r}; got {region!r}"
        )
    return sorted(rows, key=lambda o: o.horizon)


def _baseline_label(facts: BriefingFacts) -> str:
    base = facts.methods.get("baseline") if facts.methods else None
    row = next((t for t in facts.track if t.method == base), None)
    return f"baseline: {row.label.replace(' (baseline)', '')}" if row else "baseline"


# --------------------------------------------------------------------------------------------
# outlook fan chart


_BAND_ALPHA = {90: 0.2, 50: 0.45}


def _headline_label(facts: BriefingFacts) -> str:
    """The outlook's combination in words (one per briefing unless quantities differ)."""
    labels = {o.method_label for o in facts.outlook if o.method_label}
    return labels.pop() if len(labels) == 1 else "combined forecast"


def _fan_handles(
    facts: BriefingFacts,
    *,
    provisional: bool,
    baseline: bool,
    threshold_label: str | None,
    history: bool,
    compact: bool = False,
) -> list[Any]:
    c = PALETTE["weighted_pool"]
    handles: list[Any] = []
    if history:
        handles.append(
            Line2D([], [], color=PALETTE["observed"], marker="o", ms=3.5, lw=1.2, label="observed")
        )
    if provisional:
        handles.append(
            Line2D(
                [],
                [],
                color=PALETTE["observed"],
                marker="o",
                ms=4.5,
                lw=0,
                mfc="white",
                mew=1.0,
                label="provisional (may be revised)"
                if compact
                else "observed, provisional\n(may be revised)",
            )
        )
    if provisional and any(
        any(v is not None for v in (h.get("nowcast") or [])) for h in (facts.history or {}).values()
    ):
        handles.append(
            Line2D(
                [],
                [],
                color=PALETTE["observed"],
                marker="D",
                ms=3.6,
                lw=1.0,
                alpha=0.7,
                label="expected once late reports\nare in (90% range)",
            )
        )
    handles += [
        Line2D(
            [], [], color=c, marker="o", ms=3.5, lw=1.8, label=f"{_headline_label(facts)}, median"
        ),
        Patch(
            facecolor=mcolors.to_rgba(c, _BAND_ALPHA[50]), lw=0, label="50% range (1 in 2 chance)"
        ),
        Patch(
            facecolor=mcolors.to_rgba(c, _BAND_ALPHA[90]), lw=0, label="90% range (9 in 10 chance)"
        ),
    ]
    if baseline:
        handles.append(
            Line2D(
                [],
                [],
                color=PALETTE["baseline"],
                ls="--",
                marker="s",
                ms=3.5,
                mfc="white",
                lw=1.2,
                label=_baseline_label(facts),
            )
        )
    if threshold_label:
        handles.append(
            Line2D([], [], color=PALETTE["threshold"], ls="-.", lw=1.2, label=threshold_label)
        )
    handles.append(
        Line2D([], [], color=INK_SOFT, ls=":", lw=1.0, label=f"issued {facts.issued_text}")
    )
    return handles


def fan_chart(
    facts: BriefingFacts,
    region: str,
    quantity: str,
    *,
    horizons: Sequence[int] | None = None,
    legend: bool = True,
    compact: bool = False,
    ax: Axes | None = None,
) -> Axes:
    """Fan chart of the weighted pool's outlook for one region and quantity.

    Observed history (black; provisional weeks hollow), the pool's median with nested 50% and
    90% ranges (one hue, widest drawn first, one polygon per range), the baseline's median
    (dashed), the region's threshold (dash-dot, labelled) and a dotted line at the issue date.
    ``compact`` is for small multiples (shorter labels); ``legend=False`` leaves the legend to
    the caller. Artists carry gids (``band90``, ``band50``, ``median``, ``baseline``,
    ``threshold``, ``observed``, ``provisional``, ``issued``). Cost: O(weeks shown).
    """
    rows = _outlook_rows(facts, region, quantity, horizons)
    if ax is None:
        with _style():
            ax = _new_axes(FAN_SIZE)
    with _style():
        _draw_fan(facts, rows, ax, legend=legend, compact=compact)
    return ax


def _draw_fan(
    facts: BriefingFacts, rows: list[OutlookRow], ax: Axes, *, legend: bool, compact: bool
) -> None:
    _style_axes(ax)
    first = rows[0]
    colour = PALETTE["weighted_pool"]
    weeks = _dates([o.week_ending for o in rows])
    med = np.array([o.median for o in rows], dtype=float)
    lo50 = np.array([o.range50[0] for o in rows], dtype=float)
    hi50 = np.array([o.range50[1] for o in rows], dtype=float)
    lo90 = np.array([o.range90[0] for o in rows], dtype=float)
    hi90 = np.array([o.range90[1] for o in rows], dtype=float)
    band_x = weeks
    if weeks.size == 1:  # one horizon: a short block so the ranges stay visible
        band_x = np.array([weeks[0] - np.timedelta64(2, "D"), weeks[0] + np.timedelta64(2, "D")])
        lo50, hi50, lo90, hi90 = (np.repeat(a, 2) for a in (lo50, hi50, lo90, hi90))
    # nested bands, widest first, one hue with rising opacity
    ax.fill_between(
        band_x,
        lo90,
        hi90,
        color=colour,
        alpha=_BAND_ALPHA[90],
        lw=0,
        gid="band90",
        label="90% range (9 in 10 chance)",
    )
    ax.fill_between(
        band_x,
        lo50,
        hi50,
        color=colour,
        alpha=_BAND_ALPHA[50],
        lw=0,
        gid="band50",
        label="50% range (1 in 2 chance)",
    )
    ax.plot(
        weeks,
        med,
        color=colour,
        lw=1.8,
        marker="o",
        ms=3.5,
        gid="median",
        label=f"{first.method_label or 'combined forecast'}, median",
        zorder=4,
    )

    tops = [float(np.nanmax(hi90))]
    hist = facts.history.get(f"{first.region}|{first.quantity}") if facts.history else None
    has_prov = False
    if hist and hist.get("week_ending"):
        hw = _dates(hist["week_ending"])
        hv = np.array(hist["value"], dtype=float)
        prov = np.array(hist.get("provisional") or [False] * hv.size, dtype=bool)
        has_prov = bool(prov.any())
        ax.plot(hw, hv, color=PALETTE["observed"], lw=1.2, zorder=5, gid="observed-line")
        ax.plot(
            hw[~prov],
            hv[~prov],
            lw=0,
            marker="o",
            ms=3.2,
            color=PALETTE["observed"],
            zorder=6,
            gid="observed",
            label="observed",
        )
        if has_prov:
            ax.plot(
                hw[prov],
                hv[prov],
                lw=0,
                marker="o",
                ms=4.2,
                mfc="white",
                mew=1.0,
                color=PALETTE["observed"],
                zorder=6,
                gid="provisional",
                label="observed, provisional (may be revised)",
            )
        now = hist.get("nowcast") or [None] * hv.size
        has_now = [k for k, c in enumerate(now) if c is not None]
        if has_now:
            nx = hw[has_now]
            nv = np.array([now[k][0] for k in has_now], dtype=float)
            nlo = np.array([now[k][1] for k in has_now], dtype=float)
            nhi = np.array([now[k][2] for k in has_now], dtype=float)
            ax.vlines(
                nx,
                nlo,
                nhi,
                color=PALETTE["observed"],
                lw=1.0,
                alpha=0.7,
                zorder=5,
                gid="nowcast-range",
            )
            ax.plot(
                nx,
                nv,
                lw=0,
                marker="D",
                ms=3.6,
                color=PALETTE["observed"],
                alpha=0.7,
                zorder=6,
                gid="nowcast",
                label="expected once late reports are in (with its 90% range)",
            )
            tops.append(float(np.nanmax(nhi)))
        tops.append(float(np.nanmax(hv)))
        x_lo = hw[0]
    else:
        x_lo = weeks[0] - np.timedelta64(7, "D")

    base = [o.baseline_median for o in rows]
    has_base = any(b is not None for b in base)
    if has_base:
        bv = np.array([np.nan if b is None else b for b in base], dtype=float)
        ax.plot(
            weeks,
            bv,
            color=PALETTE["baseline"],
            ls="--",
            marker="s",
            ms=3.5,
            mfc="white",
            lw=1.2,
            zorder=3,
            gid="baseline",
            label=_baseline_label(facts),
        )
        tops.append(float(np.nanmax(bv)))

    issued = float(mdates.date2num(np.datetime64(facts.issued, "D")))
    ax.axvline(issued, color=INK_SOFT, ls=":", lw=1.0, gid="issued", zorder=2)

    top = max(tops) if tops else 1.0
    thr_label = None
    if first.threshold is not None:
        thr = float(first.threshold)
        thr_label = first.threshold_label or "threshold"
        ax.axhline(thr, color=PALETTE["threshold"], ls="-.", lw=1.2, gid="threshold", zorder=3)
        # show the line when it is within reach of the data; else say where it is
        on_scale = thr <= 1.6 * top
        top = max(top, thr) if on_scale else top
        text = (first.threshold_text or "") if compact else f"{thr_label}: {first.threshold_text}"
        if on_scale:
            ax.annotate(
                text,
                (0.01, thr),
                xycoords=ax.get_yaxis_transform(),
                xytext=(0, 2.5),
                textcoords="offset points",
                ha="left",
                va="bottom",
                fontsize=6.5 if compact else 7.5,
                color=PALETTE["threshold"],
                gid="threshold-label",
                zorder=7,
            )
        else:
            ax.text(
                0.01,
                0.985,
                f"\u2191 {text} (above this scale)"
                if compact
                else f"\u2191 {text}, above the top of this chart",
                transform=ax.transAxes,
                ha="left",
                va="top",
                fontsize=6.5 if compact else 7.5,
                color=PALETTE["threshold"],
                gid="threshold-label",
                zorder=7,
            )
    ax.set_ylim(0, top * (1.12 if compact else 1.08))
    ax.set_xlim(x_lo - np.timedelta64(4, "D"), weeks[-1] + np.timedelta64(4, "D"))

    locator = mdates.AutoDateLocator(minticks=3, maxticks=5 if compact else 8)
    ax.xaxis.set_major_locator(locator)
    ax.xaxis.set_major_formatter(mdates.ConciseDateFormatter(locator, show_offset=not compact))
    if compact:
        # a fixed title and label position skip matplotlib's per-draw search for them,
        # which dominates the cost of a grid of dozens of panels
        ax.yaxis.set_major_locator(MaxNLocator(nbins=5, steps=[1, 2, 5, 10], integer=True))
        ax.set_title(first.region_name, fontsize=8, y=1.0, pad=4.0)
        ax.xaxis.set_label_coords(0.5, -0.2)
        ax.yaxis.set_label_coords(-0.25, 0.5)
        ax.tick_params(labelsize=6.5)
    else:
        ax.yaxis.set_major_locator(MaxNLocator(nbins=7, steps=[1, 2, 5, 10], integer=True))
        ax.set_title(f"{first.region_name}: {_lower_first(first.quantity_name)}", y=1.0, pad=6.0)
        ax.set_ylabel(first.unit)
        ax.set_xlabel("week ending")
    if legend:
        ax.legend(
            handles=_fan_handles(
                facts,
                provisional=has_prov,
                baseline=has_base,
                threshold_label=thr_label,
                history=bool(hist and hist.get("week_ending")),
            ),
            loc="upper left",
            bbox_to_anchor=(1.01, 1.0),
            borderaxespad=0.0,
        )


def outlook_grid(
    facts: BriefingFacts,
    quantity: str,
    *,
    ncols: int = 3,
    include_total: bool = False,
) -> Figure:
    """Small multiples: one compact fan chart per region (each on its own scale).

    The jurisdiction total is left out unless ``include_total`` (it has its own large chart).
    Returns the Figure (the caller closes it). Cost: O(regions x weeks).
    """
    _check_quantity(facts, quantity)
    if ncols < 1:
        raise ValueError(f"ncols must be at least 1; got {ncols}")
    present = {o.region for o in facts.outlook if o.quantity == quantity}
    regions = [
        r for r in facts.regions if r["id"] in present and (include_total or not r["is_total"])
    ]
    if not regions:
        regions = [r for r in facts.regions if r["id"] in present]
    n = len(regions)
    cols = min(ncols, max(n, 1))
    nrows = max(1, -(-n // cols))
    info = _quantity_info(facts, quantity)
    panels = [_outlook_rows(facts, str(r["id"]), quantity) for r in regions]
    hists = [facts.history.get(f"{r['id']}|{quantity}") if facts.history else None for r in regions]
    thr_label = next((p[0].threshold_label for p in panels if p[0].threshold_label), None)
    handles = _fan_handles(
        facts,
        history=True,
        compact=True,
        provisional=any(bool(h and any(h.get("provisional") or [])) for h in hists),
        baseline=any(o.baseline_median is not None for p in panels for o in p),
        threshold_label=f"{thr_label} (value beside it)" if thr_label else None,
    )
    # fixed margins in inches instead of constrained layout: with dozens of panels the
    # layout solver would cost more than the drawing (compact panels have known label sizes);
    # the legend on top is measured first and the panels start below it
    foot, left, right, gap_w, gap_h = 0.32, 0.62, 0.08, 0.42, 0.5
    with _style():
        fig = Figure(figsize=(COLUMN_WIDTH, PANEL_HEIGHT * nrows + 1.0))
        FigureCanvasAgg(fig)
        leg = fig.legend(
            handles=handles,
            loc="upper left",
            ncols=3,
            fontsize=7,
            columnspacing=1.6,
            handlelength=2.2,
            borderaxespad=0.0,
        )
        leg_h = leg.get_window_extent(_renderer(fig)).height / fig.dpi
        head = leg_h + 0.5
        height = round(head + foot + PANEL_HEIGHT * nrows, 2)
        fig.set_size_inches(COLUMN_WIDTH, height)
        leg.set_bbox_to_anchor((0.1 / COLUMN_WIDTH, 1 - 0.06 / height))
        fig.text(
            0.1 / COLUMN_WIDTH,
            1 - (leg_h + 0.14) / height,
            f"Each panel: {info['unit']}, on its own scale.",
            fontsize=7,
            color=INK_SOFT,
            ha="left",
            va="top",
            gid="grid-note",
        )
        aw = (COLUMN_WIDTH - left - right - gap_w * (cols - 1)) / cols
        ah = (height - head - foot - gap_h * (nrows - 1)) / nrows
        grid = fig.add_gridspec(
            nrows,
            cols,
            left=left / COLUMN_WIDTH,
            right=1 - right / COLUMN_WIDTH,
            bottom=foot / height,
            top=1 - head / height,
            wspace=gap_w / aw,
            hspace=gap_h / ah,
        )
        axes = grid.subplots(squeeze=False)
        for i, rows in enumerate(panels):
            ax = axes[i // cols][i % cols]
            _draw_fan(facts, rows, ax, legend=False, compact=True)
            if i % cols == 0:
                ax.set_ylabel(info["unit"], fontsize=7)
        for j in range(n, nrows * cols):
            axes[j // cols][j % cols].set_visible(False)
    return fig


def fan_alt_text(facts: BriefingFacts, region: str, quantity: str) -> str:
    """The takeaway of one fan chart, in words, from the facts' own formatted texts."""
    rows = _outlook_rows(facts, region, quantity)
    a, z = rows[0], rows[-1]
    q = _lower_first(a.quantity_name)
    parts = [
        f"Fan chart of weekly {q} in {a.region_name}, issued {facts.issued_text}: "
        f"about {a.median_text} expected in the week ending {a.week_ending_text}, "
        f"a 9 in 10 chance between {a.range90_low_text} and {a.range90_high_text}"
    ]
    if z is not a:
        parts.append(
            f"; by the week ending {z.week_ending_text}, about {z.median_text} "
            f"(9 in 10 chance between {z.range90_low_text} and "
            f"{z.range90_high_text})"
        )
    if a.threshold is not None:
        line = a.threshold_label or "threshold"
        parts.append(f"; the {line} is at {a.threshold_text}")
        if a.p_above_threshold_text:
            parts.append(
                f", with {a.p_above_threshold_text} chance of going above it in the "
                f"week ending {a.week_ending_text}"
            )
    parts.append(".")
    if a.last_value_text != "n/a":
        prov = " (provisional: may be revised)" if a.last_provisional else ""
        parts.append(
            f" The latest observed value was {a.last_value_text} in the week ending "
            f"{a.last_week_text}{prov}."
        )
    return "".join(parts)


def outlook_alt_text(
    facts: BriefingFacts, quantity: str, *, include_total: bool = False, max_listed: int = 8
) -> str:
    """The takeaway of the small multiples: each region's next-week outlook (up to a few)."""
    info = _quantity_info(facts, quantity)
    first = min(facts.horizons) if facts.horizons else 1
    rows = [
        o
        for o in facts.outlook
        if o.quantity == quantity and o.horizon == first and (include_total or not o.is_total)
    ]
    order = {r["id"]: i for i, r in enumerate(facts.regions)}
    rows.sort(key=lambda o: order.get(o.region, len(order)))
    q = _lower_first(str(info["name"]))
    if not rows:
        return f"Small multiples of weekly {q}: no regional forecasts this week."
    head = (
        f"Small multiples of weekly {q} in {len(rows)} regions, each on its own scale, "
        f"for the week ending {rows[0].week_ending_text}: "
    )
    listed = "; ".join(
        f"{o.region_name} about {o.median_text} (9 in 10 chance {o.range90_text})"
        for o in rows[:max_listed]
    )
    tail = "." if len(rows) <= max_listed else "; the other regions are in the outlook table."
    return head + listed + tail


# --------------------------------------------------------------------------------------------
# reliability: calibration x information


#: Calibration scores below this are drawn at it (the tick says "<="): badly calibrated
#: models can score 1e-40, and a 40-decade axis would squeeze the decision region (around
#: the cutoff, typically 0.01 to 1) into a corner. Below 1e-4 the exact score does not matter
#: to a reader: such a model is far below any cutoff.
CAL_FLOOR = 1e-4


def _alpha_row(facts: BriefingFacts, quantity: str, horizon: int) -> Mapping[str, Any] | None:
    return next(
        (a for a in facts.alpha if a["quantity"] == quantity and int(a["horizon"]) == horizon), None
    )


def _superscript(n: int) -> str:
    return str(n).translate(
        str.maketrans(
            "-0123456789", "\u207b\u2070\u00b9\u00b2\u00b3\u2074\u2075\u2076\u2077\u2078\u2079"
        )
    )


def _decade_label(x: float, floor: float) -> str:
    e = round(np.log10(x))
    text = {0: "1", -1: "0.1", -2: "0.01", -3: "0.001"}.get(e, f"10{_superscript(e)}")
    return f"\u2264{text}" if x <= floor * 1.0001 and floor <= CAL_FLOOR * 1.0001 else text


def _points(
    facts: BriefingFacts, quantity: str, horizon: int
) -> tuple[list[tuple[str, float | None, float | None, float, str]], bool]:
    """(model, calibration, information, weight, verdict) for each model; per-horizon scores
    when the facts' weights carry them, else the verdicts' scores pooled over horizons."""
    verdicts = {v.model: v for v in facts.verdicts if v.quantity == quantity}
    weights = {
        str(w["model"]): w
        for w in facts.weights
        if w["quantity"] == quantity and int(w["horizon"]) == horizon
    }
    per_h = bool(weights) and all(
        "calibration" in w and "information" in w for w in weights.values()
    )
    out = []
    for model, v in verdicts.items():
        w = weights.get(model)
        weight = float(w["weight"]) if w is not None else v.weight
        if per_h and w is not None:
            cal, inf = w["calibration"], w["information"]
        else:
            cal, inf = v.calibration, v.information
        out.append(
            (
                model,
                None if cal is None else float(cal),
                None if inf is None else float(inf),
                weight,
                v.verdict,
            )
        )
    return out, per_h


def reliability_chart(
    facts: BriefingFacts,
    quantity: str,
    *,
    horizon: int | None = None,
    ax: Axes | None = None,
) -> Axes:
    """Every model for a quantity by calibration (x, log) and information (y, linear).

    x is log because calibration scores span many orders of magnitude (scores below
    ``CAL_FLOOR`` sit at the left edge). y is linear: information scores are relative
    entropies, already on a log-ratio scale, within one order of magnitude, and can be 0.
    Dot size shows the weight at ``horizon`` (default the first), marker and colour the
    verdict; the dashed line is that horizon's calibration cutoff alpha, the grey dotted one
    the verdict's test level; the star is the weighted pool when the facts give its scores.
    Cost: O(models^2 x candidates^2) for label placement (see :func:`_place_labels`).
    """
    _check_quantity(facts, quantity)
    h = min(facts.horizons) if horizon is None else horizon
    if h not in facts.horizons:
        raise ValueError(
            f"horizon must be one of {', '.join(map(str, facts.horizons))}; got {horizon!r}"
        )
    pts, per_h = _points(facts, quantity, h)
    with _style():
        if ax is None:
            ax = _new_axes(RELIABILITY_SIZE)
        _draw_reliability(facts, quantity, h, pts, per_h, ax)
    return ax


def _size(weight: float) -> float:
    return 28.0 + 230.0 * max(0.0, min(1.0, weight))


def _draw_reliability(
    facts: BriefingFacts,
    quantity: str,
    h: int,
    pts: list[tuple[str, float | None, float | None, float, str]],
    per_h: bool,
    ax: Axes,
) -> None:
    _style_axes(ax, grid_axis="both")
    shown = [p for p in pts if p[1] is not None and p[2] is not None]
    missing = [p[0] for p in pts if p[1] is None or p[2] is None]
    cals = [p[1] for p in shown if p[1] is not None and p[1] > 0]
    arow = _alpha_row(facts, quantity, h)
    alpha = None if arow is None or arow.get("alpha") is None else float(arow["alpha"])
    level = facts.methods.get("verdict_test_level") if facts.methods else None
    lows = [*cals, *([alpha] if alpha else []), *([float(level)] if level else [])]
    low = min(lows) if lows else 1e-3
    floor = max(CAL_FLOOR, 10.0 ** np.floor(np.log10(low))) if low > 0 else CAL_FLOOR
    ax.set_xscale("log")
    ax.set_xlim(floor / 2.5, 1.4)

    def xpos(c: float) -> float:
        return max(c, floor)

    # models right of the cutoff can carry weight: a light wash marks that side
    if alpha is not None:
        ax.axvspan(alpha, 1.4, color=PALETTE["weighted_pool"], alpha=0.06, lw=0, zorder=0)
        ax.axvline(alpha, color=PALETTE["cutoff"], ls="--", lw=1.1, gid="alpha", zorder=2)
    if level is not None:
        ax.axvline(float(level), color=INK_SOFT, ls=":", lw=0.9, gid="test-level", zorder=2)

    xs, ys, sizes = [], [], []
    for model, cal, inf, weight, verdict in shown:
        marker, colour, filled = _VERDICT_STYLE.get(verdict, ("o", OKABE_ITO["black"], True))
        assert cal is not None
        assert inf is not None
        x = xpos(cal)
        ax.scatter(
            [x],
            [inf],
            s=_size(weight),
            marker=marker,
            facecolors=colour if filled else "white",
            edgecolors=colour if filled else INK,
            linewidths=0.8 if filled else 1.1,
            alpha=0.9,
            zorder=4,
            gid=f"model:{model}",
        )
        xs.append(x)
        ys.append(inf)
        sizes.append(_size(weight))
    pool_pts = []
    for key, prefix, marker, size in (
        ("weighted_pool", "pool", "*", 170.0),
        ("equal_pool", "equal_pool", "P", 110.0),
    ):
        cal_v = None if arow is None else arow.get(f"{prefix}_calibration")
        inf_v = None if arow is None else arow.get(f"{prefix}_information")
        if cal_v is not None and inf_v is not None:
            pool_pts.append((key, float(cal_v), float(inf_v), marker, size))
    for key, cal, inf, marker, s in pool_pts:
        ax.scatter(
            [xpos(cal)],
            [inf],
            s=s,
            marker=marker,
            facecolors=PALETTE[key],
            edgecolors="white",
            linewidths=0.8,
            zorder=5,
            gid=key,
        )
        xs.append(xpos(cal))
        ys.append(inf)
        sizes.append(s)

    all_y = [*ys]
    y_hi = max(all_y) if all_y else 1.0
    ax.set_ylim(0, y_hi * 1.18 + 0.05)
    ax.xaxis.set_major_locator(FixedLocator(_decades(floor)))
    ax.xaxis.set_minor_locator(NullLocator())
    ax.xaxis.set_major_formatter(FuncFormatter(lambda x, _pos: _decade_label(x, floor)))
    ax.set_xlabel(
        "calibration score (log scale): further right = ranges held as often as they should"
    )
    ax.set_ylabel("information score: higher = sharper forecasts")
    info = _quantity_info(facts, quantity)
    ax.set_title(f"{info['name']}: calibration and information of each model", y=1.0, pad=6.0)

    # legend: verdicts present, the lines, the pools, dot size
    handles: list[Any] = []
    for verdict in dict.fromkeys(p[4] for p in shown):
        marker, colour, filled = _VERDICT_STYLE.get(verdict, ("o", OKABE_ITO["black"], True))
        handles.append(
            Line2D(
                [],
                [],
                lw=0,
                marker=marker,
                ms=6,
                color=colour,
                mfc=colour if filled else "white",
                mec=colour if filled else INK,
                label=verdict,
            )
        )
    for key, *_rest in pool_pts:
        handles.append(
            Line2D(
                [],
                [],
                lw=0,
                marker="*" if key == "weighted_pool" else "P",
                ms=9 if key == "weighted_pool" else 7,
                color=PALETTE[key],
                label=(
                    "combined (reliability-weighted)"
                    if key == "weighted_pool"
                    else "combined (equal weights)"
                ),
            )
        )
    when = "next week" if h == 1 else f"{h} weeks ahead"
    if alpha is not None:
        handles.append(
            Line2D(
                [],
                [],
                color=PALETTE["cutoff"],
                ls="--",
                lw=1.1,
                label=f"weight cutoff {when}: {alpha:.3g}",
            )
        )
    if level is not None:
        handles.append(
            Line2D(
                [],
                [],
                color=INK_SOFT,
                ls=":",
                lw=0.9,
                label=f"verdict 'reliable' from {float(level):g}",
            )
        )
    handles.append(
        Line2D(
            [],
            [],
            lw=0,
            marker="o",
            ms=np.sqrt(_size(0.0)),
            mfc="none",
            mec=INK_SOFT,
            label=f"dot size: weight {when}, 0 ...",
        )
    )
    handles.append(
        Line2D(
            [],
            [],
            lw=0,
            marker="o",
            ms=np.sqrt(_size(1.0)),
            mfc="none",
            mec=INK_SOFT,
            label="... to 1",
        )
    )
    ax.legend(
        handles=handles,
        loc="upper left",
        bbox_to_anchor=(1.01, 1.0),
        borderaxespad=0.0,
        labelspacing=0.9,
    )
    notes = []
    if not per_h and len(facts.horizons) > 1:
        hs = f"{min(facts.horizons)}\u2013{max(facts.horizons)}"
        notes.append(
            f"Model positions pool {hs} weeks ahead; weights and cutoff are for "
            f"{when}, so a model left of the line can still carry weight."
        )
    if missing:
        notes.append("Not placed (no score yet): " + ", ".join(missing) + ".")
    if notes:
        ax.text(
            1.01,
            0.0,
            "\n".join(textwrap.fill(n, 46) for n in notes),
            transform=ax.transAxes,
            ha="left",
            va="bottom",
            fontsize=6.5,
            color=INK_SOFT,
            gid="note",
        )
    names = [p[0] for p in shown] + [
        ("combined" if k == "weighted_pool" else "equal") for k, *_r in pool_pts
    ]
    rules = [v for v in (alpha, None if level is None else float(level)) if v is not None]
    _place_labels(ax, xs, ys, names, sizes, lines_x=rules)


def _decades(floor: float) -> list[float]:
    lo = round(float(np.log10(floor)))
    step = 1 if lo >= -4 else (2 if lo >= -8 else 3)
    ticks = [10.0**e for e in range(0, lo - 1, -step)]
    if ticks[-1] > floor * 1.0001:
        ticks.append(floor)
    return sorted(ticks)


#: Where a model's name may go, in the order tried: (dx, dy, ha, va), the offset's direction.
_LABEL_DIRECTIONS: tuple[tuple[float, float, str, str], ...] = (
    (1, 0, "left", "center"),
    (-1, 0, "right", "center"),
    (0, 1, "center", "bottom"),
    (0, -1, "center", "top"),
    (1, 1, "left", "bottom"),
    (-1, 1, "right", "bottom"),
    (1, -1, "left", "top"),
    (-1, -1, "right", "top"),
    (0.4, 1, "left", "bottom"),
    (-0.4, 1, "right", "bottom"),
    (0.4, -1, "left", "top"),
    (-0.4, -1, "right", "top"),
    (1, 0.5, "left", "bottom"),
    (-1, 0.5, "right", "bottom"),
    (1, -0.5, "left", "top"),
    (-1, -0.5, "right", "top"),
)
#: How far beyond the dot's edge (points), and whether a leader line joins label and dot.
_LABEL_REACHES = ((3.0, False), (14.0, True), (26.0, True), (40.0, True), (56.0, True))
#: Clear space kept around each label (points, x and y).
_LABEL_PAD = (2.0, 1.5)
#: Repair rounds after the greedy pass (used only when the search finds nothing).
_LABEL_ROUNDS = 6
#: Most steps the label search may take before falling back to the greedy pass.
_LABEL_SEARCH = 20000
#: Gap between a leader line and the name it points from (points).
_LEADER_GAP = 1.5


def _renderer(fig: Any) -> Any:
    canvas = fig.canvas
    if hasattr(canvas, "get_renderer"):
        return canvas.get_renderer()
    return fig._get_renderer()


def _place_labels(
    ax: Axes,
    xs: Sequence[float],
    ys: Sequence[float],
    names: Sequence[str],
    sizes: Sequence[float],
    *,
    lines_x: Sequence[float] = (),
) -> None:
    """Name each point beside it, trying sixteen directions, then further out with a leader
    line, so that nothing a reader sees collides.

    A name (gid ``label:<name>``) is kept off every dot, every other name, the vertical lines
    at ``lines_x`` (data) and the axes' edge; a name without a leader sits nearer its own dot
    than any other; a leader (a separate artist, gid ``leader:<name>``) keeps off every
    other name, every other leader and every dot but the ones it starts from. Names and dots
    are padded by ``_LABEL_PAD`` points, so a layout re-solved at another dpi (the PNG's, or
    the SVG's 72) still leaves them apart. Every candidate is measured once with the
    figure's renderer, after its layout is solved; then a depth-first search (fewest options
    first, nearest candidate first) looks for a placement where nothing touches, and should
    none exist within ``_LABEL_SEARCH`` steps, a greedy pass with repair keeps the placement
    touching least. Cost: O(models^2 x candidates^2) for the conflict tables, the search
    bounded by ``_LABEL_SEARCH``.
    """
    if not names:
        return
    fig = _figure_of(ax)
    fig.draw_without_rendering()
    renderer = _renderer(fig)
    scale = fig.dpi / 72.0
    pad = np.array(_LABEL_PAD) * scale
    grow = np.concatenate([-pad, pad])
    n_labels = len(names)
    pix = ax.transData.transform(np.column_stack([xs, ys]))
    radii = np.sqrt(np.asarray(sizes, dtype=float)) / 2  # points
    r_pix = radii * scale
    dots = np.column_stack([pix - r_pix[:, None], pix + r_pix[:, None]])
    # dots that overlap one another read as one blob: a leader may leave it anywhere
    blob = _boxes_meet(dots[:, None, :], dots[None, :, :])
    box = ax.get_window_extent(renderer)
    rules = [float(ax.transData.transform((x, ys[0]))[0]) for x in lines_x]
    steps = np.linspace(0.0, 1.0, 24)[None, :, None]
    options = [
        (reach, with_leader, direction)
        for reach, with_leader in _LABEL_REACHES
        for direction in _LABEL_DIRECTIONS
    ]
    lead = np.array([with_leader for _r, with_leader, _d in options])
    share = {"left": 0.0, "center": 0.5, "right": 1.0, "bottom": 0.0, "top": 1.0}
    align = np.array([(share[ha], share[va]) for _r, _w, (_x, _y, ha, va) in options])

    # measure every candidate once: its name's box, its leader, what it touches on its own
    offs, padded, lines, alone = [], [], [], []
    for i in range(n_labels):
        off = np.array(
            [
                (dx * (radii[i] + r), dy * (radii[i] + r) * 0.8)
                for r, _w, (dx, dy, _h, _v) in options
            ]
        )
        # a name's box only moves with its anchor: measure it once, place it by alignment
        probe = ax.annotate(names[i], (xs[i], ys[i]), fontsize=7, ha="left", va="bottom")
        bb = probe.get_window_extent(renderer)
        probe.remove()
        size = np.array([bb.width, bb.height])
        anchor = pix[i] + off * scale
        lower = anchor - size * align
        text = np.column_stack([lower, lower + size])
        u = anchor - pix[i]
        u /= np.hypot(u[:, 0], u[:, 1])[:, None]
        a = pix[i] + u * r_pix[i]
        b = anchor - u * _LEADER_GAP * scale
        line = a[:, None, :] + (b - a)[:, None, :] * steps  # (K, samples, 2)
        n = _boxes_meet(text[:, None, :], dots[None, :, :]).sum(axis=1)
        n += sum(((text[:, 0] - pad[0] < x) & (x < text[:, 2] + pad[0])).astype(int) for x in rules)
        gaps = np.stack([_box_gaps(t, pix) for t in text]) - r_pix[None, :]
        n += (~lead) & np.any((gaps < gaps[:, i : i + 1]) & ~blob[i][None, :], axis=1)
        near = np.flatnonzero(~blob[i])
        n += lead * _points_in_boxes(line, dots[near] + grow).sum(axis=1)
        outside = (
            (text[:, 0] < box.x0)
            | (text[:, 2] > box.x1)
            | (text[:, 1] < box.y0)
            | (text[:, 3] > box.y1)
        )
        offs.append(off)
        padded.append(text + grow)
        lines.append(line)
        alone.append(n + 10 * outside)

    # what two candidates of two names do to each other (symmetric)
    clash: dict[tuple[int, int], np.ndarray] = {}
    for i in range(n_labels):
        for j in range(i + 1, n_labels):
            c = _boxes_meet(padded[i][:, None, :], padded[j][None, :, :])
            c |= lead[:, None] & _points_in_boxes(lines[i], padded[j])
            c |= lead[None, :] & _points_in_boxes(lines[j], padded[i]).T
            c |= (lead[:, None] & lead[None, :]) & _segments_cross(
                lines[i][:, None, 0],
                lines[i][:, None, -1],
                lines[j][None, :, 0],
                lines[j][None, :, -1],
            )
            clash[i, j], clash[j, i] = c, c.T

    choice = _search_labels(alone, clash) or _greedy_labels(
        alone,
        clash,
        order=[int(k) for k in np.argsort(-np.asarray(ys, dtype=float), kind="stable")],
    )
    for i, k in enumerate(choice):
        _r, with_leader, (_dx, _dy, ha, va) = options[k]
        ann = ax.annotate(
            names[i],
            (xs[i], ys[i]),
            xytext=tuple(offs[i][k]),
            textcoords="offset points",
            ha=ha,
            va=va,
            fontsize=7,
            color=INK,
            zorder=8,
            gid=f"label:{names[i]}",
        )
        ann.set_in_layout(False)  # labels must not move the axes they were fitted to
        if with_leader:
            leader = ax.annotate(
                "",
                (xs[i], ys[i]),
                xytext=tuple(offs[i][k]),
                textcoords="offset points",
                zorder=7,
                gid=f"leader:{names[i]}",
                arrowprops={
                    "arrowstyle": "-",
                    "color": INK_SOFT,
                    "lw": 0.6,
                    "shrinkA": _LEADER_GAP,
                    "shrinkB": float(radii[i]),
                },
            )
            leader.set_in_layout(False)
            if leader.arrow_patch is not None:  # the SVG names the line drawn, too
                leader.arrow_patch.set_gid(f"leader:{names[i]}")


def _search_labels(
    alone: Sequence[np.ndarray], clash: Mapping[tuple[int, int], np.ndarray]
) -> list[int] | None:
    """A candidate per name such that nothing touches, or None: depth-first, the name with
    fewest options left first, each name's options in order (nearest first), forward
    checking, at most ``_LABEL_SEARCH`` steps; then each name moved to its nearest option
    that still touches nothing. Cost: bounded by ``_LABEL_SEARCH`` x names x candidates.
    """
    n = len(alone)
    steps = 0

    def go(assign: dict[int, int], free: dict[int, np.ndarray]) -> dict[int, int] | None:
        nonlocal steps
        if not free:
            return assign
        i = min(free, key=lambda j: (int(free[j].sum()), j))
        for k in np.flatnonzero(free[i]):
            steps += 1
            if steps > _LABEL_SEARCH:
                return None
            rest = {j: free[j] & ~clash[i, j][k] for j in free if j != i}
            if all(v.any() for v in rest.values()):
                found = go({**assign, i: int(k)}, rest)
                if found is not None:
                    return found
        return None

    found = go({}, {i: alone[i] == 0 for i in range(n)})
    if found is None:
        return None
    # the first placement found may reach further than it needs: bring each name to its
    # nearest option that still touches nothing, until none moves
    choice = [found[i] for i in range(n)]
    moved = True
    while moved:
        moved = False
        for i in range(n):
            ok = alone[i] == 0
            for j in range(n):
                if j != i:
                    ok &= ~clash[i, j][:, choice[j]]
            k = int(np.argmax(ok))
            if k < choice[i]:
                choice[i], moved = k, True
    return choice


def _greedy_labels(
    alone: Sequence[np.ndarray],
    clash: Mapping[tuple[int, int], np.ndarray],
    *,
    order: Sequence[int],
) -> list[int]:
    """A candidate per name touching as little as possible: greedy in ``order``, then each
    name placed again against all the others for ``_LABEL_ROUNDS`` rounds. Cost:
    O(rounds x names^2 x candidates)."""
    choice: dict[int, int] = {}

    def cost(i: int, others: Mapping[int, int]) -> np.ndarray:
        return alone[i] + sum(clash[i, j][:, k].astype(int) for j, k in others.items())

    for i in (int(v) for v in order):
        choice[i] = int(np.argmin(cost(i, choice)))
    for _round in range(_LABEL_ROUNDS):
        moved = False
        for i in list(choice):
            c = cost(i, {j: k for j, k in choice.items() if j != i})
            k = int(np.argmin(c))
            if c[k] < c[choice[i]]:
                choice[i], moved = k, True
        if not moved:
            break
    return [choice[i] for i in range(len(alone))]


def _points_in_boxes(lines: np.ndarray, boxes: np.ndarray) -> np.ndarray:
    """(K, samples, 2) polylines against (M, 4) boxes: whether any sample of line k lies
    inside box m, as (K, M)."""
    x = lines[:, None, :, 0]
    y = lines[:, None, :, 1]
    b = boxes[None, :, None, :]
    inside = (x > b[..., 0]) & (x < b[..., 2]) & (y > b[..., 1]) & (y < b[..., 3])
    return np.asarray(inside.any(axis=2), dtype=bool)


def _boxes_meet(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Whether boxes (x0, y0, x1, y1) overlap, broadcasting over leading axes."""
    return (
        (a[..., 0] < b[..., 2])
        & (a[..., 2] > b[..., 0])
        & (a[..., 1] < b[..., 3])
        & (a[..., 3] > b[..., 1])
    )


def _box_gaps(bb: np.ndarray, points: np.ndarray) -> np.ndarray:
    """Distance from the box (x0, y0, x1, y1) to each point (0 inside)."""
    dx = np.maximum.reduce([bb[0] - points[:, 0], np.zeros(len(points)), points[:, 0] - bb[2]])
    dy = np.maximum.reduce([bb[1] - points[:, 1], np.zeros(len(points)), points[:, 1] - bb[3]])
    return np.hypot(dx, dy)


def _segments_cross(p1: np.ndarray, p2: np.ndarray, q1: np.ndarray, q2: np.ndarray) -> np.ndarray:
    """Whether segments p1-p2 and q1-q2 properly cross (orientation test; common practice),
    broadcasting over leading axes of the (..., 2) end points."""

    def side(a: np.ndarray, b: np.ndarray, c: np.ndarray) -> np.ndarray:
        return (b[..., 0] - a[..., 0]) * (c[..., 1] - a[..., 1]) - (b[..., 1] - a[..., 1]) * (
            c[..., 0] - a[..., 0]
        )

    return (side(q1, q2, p1) * side(q1, q2, p2) < 0) & (side(p1, p2, q1) * side(p1, p2, q2) < 0)


def reliability_alt_text(facts: BriefingFacts, quantity: str, *, horizon: int | None = None) -> str:
    """The takeaway of the reliability chart: verdicts, the cutoff and who carries weight."""
    info = _quantity_info(facts, quantity)
    h = min(facts.horizons) if horizon is None else horizon
    vs: list[ModelVerdict] = [v for v in facts.verdicts if v.quantity == quantity]
    q = _lower_first(str(info["name"]))
    if not vs:
        return f"Chart of the models for {q}: no model has been scored yet."
    groups: dict[str, list[str]] = {}
    for v in vs:
        groups.setdefault(v.verdict, []).append(v.model)
    said = "; ".join(f"{len(ms)} {verdict} ({', '.join(ms)})" for verdict, ms in groups.items())
    text = (
        f"Scatter chart of the {len(vs)} models for {q} by calibration score (how often "
        f"their ranges held) and information score (how sharp they are): {said}."
    )
    arow = _alpha_row(facts, quantity, h)
    when = "next week" if h == 1 else f"{h} weeks ahead"
    if arow is not None and arow.get("alpha") is not None:
        text += f" The calibration cutoff for weights {when} is {float(arow['alpha']):.3g}."
    heavy = [
        w
        for w in facts.weights
        if w["quantity"] == quantity and int(w["horizon"]) == h and float(w["weight"]) > 0
    ]
    if heavy:
        text += (
            " Weight "
            + when
            + ": "
            + ", ".join(f"{w['model']} {float(w['weight']):.2f}" for w in heavy)
            + "."
        )
    return text


# --------------------------------------------------------------------------------------------
# weights


def weights_chart(facts: BriefingFacts, quantity: str, *, ax: Axes | None = None) -> Axes:
    """Each model's weight in the combined forecast, one horizontal bar per horizon.

    Bars are horizontal so model names read level; each bar's length (``get_width()``) is the
    facts' weight. Models without weight say why (below the cutoff / not yet rated). Bars of
    horizon h carry gid ``weights-h<h>``. Cost: O(models x horizons).
    """
    _check_quantity(facts, quantity)
    rows = [w for w in facts.weights if w["quantity"] == quantity]
    order = [v.model for v in facts.verdicts if v.quantity == quantity]
    models = [*order, *sorted({str(w["model"]) for w in rows} - set(order))]
    horizons = sorted({int(w["horizon"]) for w in rows}) or list(facts.horizons)
    colours = horizon_colors(horizons)
    n_h = len(horizons)
    band = 0.8
    bh = band / max(n_h, 1)
    with _style():
        if ax is None:
            ax = _new_axes((COLUMN_WIDTH, round(0.95 + 0.42 * max(len(models), 1), 2)))
        _style_axes(ax, grid_axis="x")
        table = {(str(w["model"]), int(w["horizon"])): w for w in rows}
        y0 = np.arange(len(models), dtype=float)
        for k, h in enumerate(horizons):
            y = y0 - band / 2 + bh * (k + 0.5)
            widths = [float(table[(m, h)]["weight"]) if (m, h) in table else 0.0 for m in models]
            bars = ax.barh(
                y,
                widths,
                height=bh * 0.9,
                color=colours[h],
                gid=f"weights-h{h}",
                label="next week" if h == 1 else f"{h} weeks ahead",
                zorder=3,
            )
            for bar, w in zip(bars, widths, strict=True):
                if w > 0:
                    ax.text(
                        w + 0.01,
                        bar.get_y() + bar.get_height() / 2,
                        f"{w:.2f}",
                        va="center",
                        ha="left",
                        fontsize=6.5,
                        color=INK,
                    )
        for i, m in enumerate(models):
            ws = [table[(m, h)] for h in horizons if (m, h) in table]
            if ws and all(float(w["weight"]) == 0 for w in ws):
                why = (
                    "not yet rated"
                    if not any(bool(w["rated"]) for w in ws)
                    else "below the calibration cutoff"
                )
                ax.text(
                    0.012,
                    i,
                    f"no weight: {why}",
                    va="center",
                    ha="left",
                    fontsize=7,
                    color=INK_SOFT,
                    gid=f"no-weight:{m}",
                )
        ax.set_yticks(y0, models)
        ax.invert_yaxis()
        ax.set_ylim(len(models) - 0.5, -0.5)
        ax.set_xlim(0, 1.1)
        ax.set_xticks([0, 0.25, 0.5, 0.75, 1.0])
        ax.tick_params(axis="y", length=0)
        ax.set_xlabel("weight in the combined forecast (each week ahead adds up to 1)")
        info = _quantity_info(facts, quantity)
        ax.set_title(f"{info['name']}: weight of each model", y=1.0, pad=6.0)
        ax.legend(
            loc="upper left",
            bbox_to_anchor=(1.01, 1.0),
            borderaxespad=0.0,
            handlelength=1.2,
            title="weeks ahead" if n_h > 1 else None,
            title_fontsize=7.5,
            alignment="left",
        )
    return ax


def weights_alt_text(facts: BriefingFacts, quantity: str) -> str:
    """The takeaway of the weights chart: who carries weight, at which horizons."""
    info = _quantity_info(facts, quantity)
    q = _lower_first(str(info["name"]))
    rows = [w for w in facts.weights if w["quantity"] == quantity]
    models = sorted({str(w["model"]) for w in rows})
    carrying: dict[str, dict[str, list[int]]] = {}
    for w in sorted(rows, key=lambda w: (str(w["model"]), int(w["horizon"]))):
        if float(w["weight"]) > 0:
            carrying.setdefault(str(w["model"]), {}).setdefault(
                f"{float(w['weight']):.2f}", []
            ).append(int(w["horizon"]))
    if not carrying:
        return f"Bar chart of model weights for {q}: no model carries weight."

    def hs(v: list[int]) -> str:
        words = [str(h) for h in v]
        joined = words[0] if len(words) == 1 else ", ".join(words[:-1]) + " and " + words[-1]
        return f"{joined} week{'s' if words != ['1'] else ''} ahead"

    said = "; ".join(
        f"{m} " + ", ".join(f"{w} at {hs(v)}" for w, v in by.items()) for m, by in carrying.items()
    )
    rest = len(models) - len(carrying)
    tail = f"; the other {rest} models have no weight." if rest else "."
    return (
        f"Bar chart of each model's weight in the combined forecast for {q}, by weeks "
        f"ahead: {said}{tail}"
    )


# --------------------------------------------------------------------------------------------
# track record


def _track_rows(facts: BriefingFacts, quantity: str) -> dict[str, list[TrackRow]]:
    _check_quantity(facts, quantity)
    base = facts.methods.get("baseline") if facts.methods else None
    out: dict[str, list[TrackRow]] = {}
    for t in facts.track:
        if t.quantity != quantity:
            continue
        key = "baseline" if t.method == base else t.method
        out.setdefault(key, []).append(t)
    for v in out.values():
        v.sort(key=lambda t: t.horizon)
    ordered = {k: out[k] for k in (*_METHOD_ORDER, "baseline") if k in out}
    ordered.update({k: v for k, v in out.items() if k not in ordered})
    return ordered


def _method_colour(key: str) -> str:
    return PALETTE.get(key, OKABE_ITO["sky blue"])


def _short_label(t: TrackRow) -> str:
    return t.label.replace("combined forecast ", "combined ")


def track_chart(facts: BriefingFacts, quantity: str, *, ax: Axes | None = None) -> Axes:
    """Relative WIS by horizon for the pools, the quantile median and the baseline (= 1).

    Lines with distinct colour, style and marker; gids ``track:<method>``. Below 1 = smaller
    error than the baseline. Cost: O(methods x horizons).
    """
    methods = _track_rows(facts, quantity)
    with _style():
        if ax is None:
            ax = _new_axes((COLUMN_WIDTH, 3.0))
        _style_axes(ax)
        hs: list[int] = []
        top = 1.0
        for key, rows in methods.items():
            ls, marker = _METHOD_STYLE.get(key, ("-", "o"))
            x = [t.horizon for t in rows if t.relative_wis is not None]
            y = [t.relative_wis for t in rows if t.relative_wis is not None]
            hs += x
            if not x:
                continue
            top = max(top, *[float(v) for v in y if v is not None])
            ax.plot(
                x,
                y,
                ls=ls,
                marker=marker,
                ms=4.5,
                lw=1.6 if key == "weighted_pool" else 1.2,
                color=_method_colour(key),
                gid=f"track:{key}",
                label=_short_label(rows[0]),
                zorder=4 if key == "weighted_pool" else 3,
                mfc="white" if key == "baseline" else _method_colour(key),
            )
        ticks = sorted(set(hs)) or list(facts.horizons)
        ax.set_xticks(ticks, [str(h) for h in ticks])
        ax.set_xlim(min(ticks) - 0.3, max(ticks) + 0.3)
        ax.set_ylim(0, top * 1.15)
        ax.axhspan(0, 1, color=PALETTE["weighted_pool"], alpha=0.04, lw=0, zorder=0)
        ax.text(
            0.01,
            0.03,
            "below 1: smaller error than the baseline",
            fontsize=6.5,
            color=INK_SOFT,
            transform=ax.transAxes,
            ha="left",
            va="bottom",
        )
        ax.set_xlabel("weeks ahead")
        ax.set_ylabel("relative WIS (baseline = 1)")
        info = _quantity_info(facts, quantity)
        ax.set_title(
            f"{info['name']}: forecast error relative to the baseline, last "
            f"{facts.track_weeks} issue dates",
            y=1.0,
            pad=6.0,
        )
        ax.legend(loc="upper left", bbox_to_anchor=(1.01, 1.0), borderaxespad=0.0)
    return ax


def coverage_chart(facts: BriefingFacts, quantity: str, *, ax: Axes | None = None) -> Axes:
    """How often each method's 90% range held, by horizon: bars of weeks inside ("74 of 84").

    Each filled bar's length is the facts' ``in_90``; the outline behind it is ``n_items``
    (all scored weeks); the label is the facts' ``in_90_text``. gids ``cover:<method>:h<h>``.
    Cost: O(methods x horizons).
    """
    methods = _track_rows(facts, quantity)
    rows = [(key, t) for key, ts in methods.items() for t in ts]
    horizons = sorted({t.horizon for _k, t in rows})
    keys = list(methods)
    with _style():
        if ax is None:
            ax = _new_axes((COLUMN_WIDTH, round(0.9 + 0.2 * max(len(rows), 1), 2)))
        _style_axes(ax, grid_axis="x")
        ticks, labels = [], []
        y = 0.0
        n_max = 1
        for h in horizons:
            for key in keys:
                t = next((r for k, r in rows if k == key and r.horizon == h), None)
                if t is None:
                    continue
                colour = _method_colour(key)
                ax.barh(
                    [y],
                    [t.n_items],
                    height=0.78,
                    facecolor="none",
                    edgecolor=INK_SOFT,
                    lw=0.6,
                    zorder=2,
                    gid=f"cover-all:{key}:h{h}",
                )
                ax.barh(
                    [y],
                    [t.in_90],
                    height=0.78,
                    color=colour,
                    zorder=3,
                    hatch="////" if key == "baseline" else None,
                    edgecolor="white" if key == "baseline" else colour,
                    lw=0,
                    gid=f"cover:{key}:h{h}",
                )
                ax.text(
                    t.n_items,
                    y,
                    f"  in {t.in_90_text}",
                    va="center",
                    ha="left",
                    fontsize=6.5,
                    color=INK,
                )
                n_max = max(n_max, t.n_items)
                y += 1
            ticks.append(y - (len(keys) + 1) / 2)
            labels.append("next week" if h == 1 else f"{h} weeks ahead")
            y += 0.8
        ax.set_yticks(ticks, labels)
        ax.tick_params(axis="y", length=0)
        ax.set_ylim(y - 0.5, -0.8)
        ax.set_xlim(0, n_max * 1.3)
        ax.set_xlabel(
            "weeks when the observed value fell inside the 90% range (outline: all weeks scored)"
        )
        info = _quantity_info(facts, quantity)
        ax.set_title(f"{info['name']}: how often the 90% range held", y=1.0, pad=6.0)
        handles = [
            Patch(
                facecolor=_method_colour(k),
                hatch="////" if k == "baseline" else None,
                edgecolor="white" if k == "baseline" else _method_colour(k),
                label=_short_label(methods[k][0]),
            )
            for k in keys
        ]
        ax.legend(handles=handles, loc="upper left", bbox_to_anchor=(1.01, 1.0), borderaxespad=0.0)
    return ax


def track_figure(facts: BriefingFacts, quantity: str) -> Figure:
    """The track record: relative WIS by horizon above, 90% coverage counts below."""
    with _style():
        fig = Figure(figsize=TRACK_SIZE, layout="constrained")
        FigureCanvasAgg(fig)
        top, bottom = fig.subplots(2, 1, height_ratios=[1.0, 1.45])
    track_chart(facts, quantity, ax=top)
    coverage_chart(facts, quantity, ax=bottom)
    return fig


def track_alt_text(facts: BriefingFacts, quantity: str) -> str:
    """The takeaway of the track-record chart, from the facts' own texts."""
    info = _quantity_info(facts, quantity)
    q = _lower_first(str(info["name"]))
    methods = _track_rows(facts, quantity)
    if not methods:
        return f"Track-record chart for {q}: no back-test yet."
    first = min(facts.horizons) if facts.horizons else 1
    parts = []
    for key, rows in methods.items():
        if key == "baseline":
            continue
        t = next((r for r in rows if r.horizon == first), None)
        if t is not None:
            parts.append(
                f"the {t.label} had {t.vs_baseline_text} (relative WIS "
                f"{t.relative_wis_text}) and its 90% range held in {t.in_90_text} "
                "weeks"
            )
    base = next((r for r in methods.get("baseline", []) if r.horizon == first), None)
    text = (
        f"Chart of the back-test over the last {facts.track_weeks} issue dates for {q}, "
        f"one week ahead: " + "; ".join(parts) + "."
    )
    if base is not None:
        text += f" The baseline's 90% range held in {base.in_90_text} weeks."
    wp = methods.get("weighted_pool", [])
    last = wp[-1] if wp else None
    if last is not None and last.horizon != first:
        text += (
            f" {last.horizon} weeks ahead, the {last.label} had {last.vs_baseline_text} "
            f"(relative WIS {last.relative_wis_text})."
        )
    return text


# --------------------------------------------------------------------------------------------
# export


def _close(fig: Figure) -> None:
    pyplot = sys.modules.get("matplotlib.pyplot")
    if pyplot is not None:
        pyplot.close(fig)
    fig.clear()


def _svg(fig: Figure, *, title: str | None = None, description: str | None = None) -> str:
    meta: dict[str, Any] = {"Date": None}
    if title:
        meta["Title"] = title
    if description:
        meta["Description"] = description
    buf = io.StringIO()
    with matplotlib.rc_context({"svg.fonttype": "none", "svg.hashsalt": _SVG_HASHSALT}):
        fig.savefig(buf, format="svg", metadata=meta)
    return buf.getvalue()


def _png(fig: Figure, *, dpi: int = 200) -> bytes:
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=dpi, metadata={"Software": None})
    return buf.getvalue()


def figure_svg(fig: Figure, *, title: str | None = None, description: str | None = None) -> str:
    """The figure as SVG text (searchable text, no date, fixed hash salt), then close it.

    ``title``/``description`` become the SVG's ``<dc:title>``/``<dc:description>``.
    """
    try:
        return _svg(fig, title=title, description=description)
    finally:
        _close(fig)


def figure_png(fig: Figure, *, dpi: int = 200) -> bytes:
    """The figure as PNG bytes at ``dpi`` (pixels = inches x dpi, no Software tag), then close."""
    try:
        return _png(fig, dpi=dpi)
    finally:
        _close(fig)


@dataclass(frozen=True)
class ChartSpec:
    """One finished figure of the briefing, ready to place: the renderer does nothing else.

    ``key`` starts with the figure kind (``fan``, ``outlook``, ``reliability``, ``weights``,
    ``track``) followed by ``_`` and the quantity (and region); ``section`` says where the
    briefing shows it.
    """

    key: str
    title: str
    caption: str
    alt: str
    svg: str = field(repr=False)
    png: bytes = field(repr=False)
    section: str = "outlook"
    wide: bool = False


def _freeze_layout(fig: Figure, *, dpi: int) -> None:
    """Solve the constrained layout once, at the PNG's dpi, then keep it for both exports.

    Text extents vary a little with the dpi (glyph hinting), so the layout is solved at the
    dpi of the raster, where a clipped label would show; the SVG's text is laid out again by
    whoever displays it. Two passes: a legend anchored beside the axes moves when the axes
    shrink, and the layout settles on the second pass.
    """
    engine = fig.get_layout_engine()
    if engine is not None and engine.__class__.__name__ == "ConstrainedLayoutEngine":
        old = fig.get_dpi()
        fig.set_dpi(dpi)
        try:
            fig.draw_without_rendering()
            fig.draw_without_rendering()
        finally:
            fig.set_dpi(old)
        fig.set_layout_engine("none")


def _spec(
    fig: Figure, *, key: str, title: str, caption: str, alt: str, section: str, dpi: int
) -> ChartSpec:
    try:
        _freeze_layout(fig, dpi=dpi)
        svg = _svg(fig, title=title, description=alt)
        png = _png(fig, dpi=dpi)
    finally:
        _close(fig)
    return ChartSpec(
        key=key, title=title, caption=caption, alt=alt, svg=svg, png=png, section=section
    )


def _fan_caption(facts: BriefingFacts, row: OutlookRow) -> str:
    line = (
        f" Dash-dot line: the {row.threshold_label or 'threshold'} at {row.threshold_text}."
        if row.threshold is not None
        else ""
    )
    return (
        f"Black: observed {_lower_first(row.quantity_name)} per week (hollow points: "
        "provisional weeks, likely to be revised; grey diamonds with bars: the count each is "
        "expected to reach once late reports are in, with its 90% range). Blue: the "
        f"{row.method_label or 'combined forecast'}, its median "
        "with the 50% (darker) and 90% (lighter) ranges. Dashed: the baseline, which "
        f"repeats the latest week.{line} Dotted: the issue date, {facts.issued_text}; data "
        f"as of {facts.data_as_of_text}."
    )


def briefing_figures(facts: BriefingFacts, *, dpi: int = 200) -> list[ChartSpec]:
    """Every figure of the briefing, rendered (SVG for print, PNG for e-mail), in order.

    Per quantity: the jurisdiction total's fan chart (when it exists), the regions' small
    multiples, the reliability chart, the weights and the track record. Cost: O(regions x
    weeks) drawing plus two renders per figure (about 0.3 s per small figure on one core).
    """
    specs: list[ChartSpec] = []
    for q in facts.quantities:
        qid, name = str(q["id"]), str(q["name"])
        rows = [o for o in facts.outlook if o.quantity == qid]
        if not rows:
            continue
        total = facts.total_region if facts.total_available else None
        total_rows = [o for o in rows if o.region == total]
        if total_rows:
            first = min(total_rows, key=lambda o: o.horizon)
            ax = fan_chart(facts, first.region, qid)
            specs.append(
                _spec(
                    _figure_of(ax),
                    key=f"fan_{qid}_{first.region}",
                    title=f"{name}: outlook for {first.region_name}",
                    caption=_fan_caption(facts, first),
                    alt=fan_alt_text(facts, first.region, qid),
                    section="outlook",
                    dpi=dpi,
                )
            )
        if any(not o.is_total for o in rows):
            first = min(rows, key=lambda o: o.horizon)
            fig = outlook_grid(facts, qid)
            specs.append(
                _spec(
                    fig,
                    key=f"outlook_{qid}",
                    title=f"{name}: outlook by region",
                    caption=_fan_caption(facts, first).replace(
                        "Dash-dot line: the", "Dash-dot line: each region's"
                    )
                    + " Each region has its own scale.",
                    alt=outlook_alt_text(facts, qid),
                    section="outlook",
                    dpi=dpi,
                )
            )
        if any(v.quantity == qid for v in facts.verdicts):
            h = min(facts.horizons)
            ax = reliability_chart(facts, qid, horizon=h)
            specs.append(
                _spec(
                    _figure_of(ax),
                    key=f"reliability_{qid}",
                    title=f"{name}: how far each model can be trusted",
                    caption=(
                        "Each model placed by its calibration score (how "
                        "often its ranges held, log scale) and information "
                        "score (how narrow its ranges are). Right of the "
                        "dashed line, a model can carry weight; bigger dots "
                        "carry more weight. The star is the combined "
                        "forecast."
                    ),
                    alt=reliability_alt_text(facts, qid, horizon=h),
                    section="trust",
                    dpi=dpi,
                )
            )
        if any(w["quantity"] == qid for w in facts.weights):
            ax = weights_chart(facts, qid)
            specs.append(
                _spec(
                    _figure_of(ax),
                    key=f"weights_{qid}",
                    title=f"{name}: weight of each model in the combined forecast",
                    caption=(
                        "Weights by weeks ahead; at each week ahead they add "
                        "up to 1. Models below the calibration cutoff, or "
                        "with too little history, get no weight."
                    ),
                    alt=weights_alt_text(facts, qid),
                    section="trust",
                    dpi=dpi,
                )
            )
        if any(t.quantity == qid for t in facts.track):
            fig = track_figure(facts, qid)
            specs.append(
                _spec(
                    fig,
                    key=f"track_{qid}",
                    title=f"{name}: track record of the combined forecasts",
                    caption=(
                        f"Back-test over the last {facts.track_weeks} issue "
                        "dates, every region. Top: forecast error (weighted "
                        "interval score) relative to the baseline; below 1 "
                        "is better. Bottom: weeks in which the observed "
                        "value fell inside each method's 90% range; a "
                        "well-calibrated 90% range still misses about 1 week "
                        "in 10."
                    ),
                    alt=track_alt_text(facts, qid),
                    section="track",
                    dpi=dpi,
                )
            )
    return specs


def _scale_text(fig: Figure, factor: float) -> None:
    """Make every text of a drawn figure ``factor`` times larger, in place.

    Tick labels go through ``set_tick_params`` so that ticks made at draw time match too.
    """
    tick_sizes = []
    for ax in fig.axes:
        for axis in (ax.xaxis, ax.yaxis):
            major = axis.get_major_ticks()
            if major:
                tick_sizes.append((axis, float(major[0].label1.get_fontsize())))
    texts = {id(t): t for t in fig.findobj(Text)}
    for t in texts.values():
        t.set_fontsize(float(t.get_fontsize()) * factor)
    for axis, size in tick_sizes:
        axis.set_tick_params(which="both", labelsize=size * factor)


def email_figures(facts: BriefingFacts, *, dpi: int = 200) -> list[ChartSpec]:
    """The e-mail's own figure: the lead quantity's jurisdiction-total fan chart, sized for mail.

    Drawn :data:`EMAIL_FAN_SIZE` inches with every text :data:`EMAIL_TEXT_SCALE` times larger
    than in the PDF, so its labels stay legible in a 552 px e-mail column. The region is the
    jurisdiction total when the facts have one, else the first region of the lead quantity's
    outlook. Key ``email_fan_<quantity>_<region>``, section ``"email"``; title, caption and alt
    text as for the PDF's fan chart. Empty when the lead quantity has no outlook. Cost: one fan
    chart, two renders.
    """
    lead = facts.summary.get("lead_quantity") if facts.summary else None
    rows = [o for o in facts.outlook if o.quantity == lead]
    if lead is None or not rows:
        return []
    qid = str(lead)
    name = str(_quantity_info(facts, qid)["name"])
    total = facts.total_region if facts.total_available else None
    region: str = (
        total if total is not None and any(o.region == total for o in rows) else rows[0].region
    )
    first = min((o for o in rows if o.region == region), key=lambda o: o.horizon)
    with _style():
        ax = _new_axes(EMAIL_FAN_SIZE)
    fan_chart(facts, region, qid, ax=ax)
    fig = _figure_of(ax)
    # the same legend, moved below the axes in two columns so the data get the full width
    side = ax.get_legend()
    if side is not None:
        handles = [h for h in side.legend_handles if h is not None]
        labels = [
            t.get_text()
            for t, h in zip(side.get_texts(), side.legend_handles, strict=True)
            if h is not None
        ]
        side.remove()
        with _style():
            fig.legend(handles, labels, loc="outside lower center", ncols=2)
    _scale_text(fig, EMAIL_TEXT_SCALE)
    return [
        _spec(
            fig,
            key=f"email_fan_{qid}_{region}",
            title=f"{name}: outlook for {first.region_name}",
            caption=_fan_caption(facts, first),
            alt=fan_alt_text(facts, region, qid),
            section="email",
            dpi=dpi,
        )
    ]


def _figure_of(ax: Axes) -> Figure:
    """The Figure that owns ``ax`` (the root one, should ``ax`` sit in a subfigure)."""
    try:
        fig: Any = ax.get_figure(root=True)  # matplotlib >= 3.10
    except TypeError:
        fig = ax.get_figure()
    assert isinstance(fig, Figure)
    return fig
