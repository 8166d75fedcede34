"""The briefing's charts: each draws exactly the facts' numbers, and the exports are stable.

Input: the facts of the invented demo scenario (run once per module, the way the weekly job
runs), plus variants of them made with ``dataclasses.replace`` for the edge cases (one
horizon, a threshold far above the data, per-horizon scores). Checks look at the artists
matplotlib holds (gids set by :mod:`forebrief.report.charts`), never at pixels.

Outside references:
- the Okabe-Ito colours as RGB triplets published in Okabe & Ito (2008), "Color Universal
  Design (CUD): how to make figures and presentations that are friendly to colorblind
  people" (triplets from memory), checked against matplotlib's own ``okabe_ito`` colour
  sequence (matplotlib >= 3.11), an independent copy;
- cividis (Nuñez, Anderton & Renslow 2018, PLOS ONE 13:e0199239) as matplotlib ships it;
- the PNG file layout (IHDR width/height at bytes 16-24, tEXt chunks) from the PNG
  specification (W3C PNG 2nd edition, sections 5.3 and 11.2.2), read with ``struct``;
- pixels = inches x dpi (docs/conventions.md §3; common practice, no source).
Every chart also lands in ``test-artifacts/charts/`` (git-ignored) for a person to look at.
"""

from __future__ import annotations

import dataclasses
import json
import re
import struct
import subprocess
import sys
import zlib
from pathlib import Path

import matplotlib
import matplotlib.colors as mcolors
import numpy as np
import pytest
from matplotlib.collections import PathCollection, PolyCollection
from matplotlib.figure import Figure

from forebrief.app.config import load_config
from forebrief.app.weekly import run_briefing
from forebrief.app.workflow import load_inputs
from forebrief.demo import generate_scenario, write_scenario
from forebrief.report import charts
from forebrief.report.facts import BriefingFacts, ModelVerdict, OutlookRow, TrackRow

ARTIFACTS = Path(__file__).resolve().parents[1] / "test-artifacts" / "charts"

# Okabe & Ito (2008), the eight colours in their published order, as 0-255 RGB (from memory).
OKABE_ITO_RGB = {
    "black": (0, 0, 0),
    "orange": (230, 159, 0),
    "sky blue": (86, 180, 233),
    "bluish green": (0, 158, 115),
    "yellow": (240, 228, 66),
    "blue": (0, 114, 178),
    "vermillion": (213, 94, 0),
    "reddish purple": (204, 121, 167),
}


# --------------------------------------------------------------------------------------------
# fixtures


@pytest.fixture(scope="module")
def facts(tmp_path_factory: pytest.TempPathFactory) -> BriefingFacts:
    folder = tmp_path_factory.mktemp("demo")
    write_scenario(generate_scenario(), folder)
    cfg = load_config(folder / "forebrief.toml")
    inputs = load_inputs(cfg.forecasts, cfg.observations, columns=cfg.columns, signed=cfg.signed)
    return run_briefing(cfg, inputs).facts


@pytest.fixture(scope="module")
def artifacts() -> Path:
    ARTIFACTS.mkdir(parents=True, exist_ok=True)
    return ARTIFACTS


def _fig(ax: matplotlib.axes.Axes) -> Figure:
    fig = charts._figure_of(ax)
    assert isinstance(fig, Figure)
    return fig


def _save(fig: Figure, artifacts: Path, name: str) -> bytes:
    png = charts.figure_png(fig)
    (artifacts / f"{name}.png").write_bytes(png)
    return png


def _by_gid(ax: matplotlib.axes.Axes, gid: str) -> list[matplotlib.artist.Artist]:
    return [a for a in ax.get_children() if a.get_gid() == gid]


def _one(ax: matplotlib.axes.Axes, gid: str) -> matplotlib.artist.Artist:
    found = _by_gid(ax, gid)
    assert len(found) == 1, f"expected one artist with gid {gid!r}, found {len(found)}"
    return found[0]


def _rows(facts: BriefingFacts, region: str, quantity: str) -> list[OutlookRow]:
    return sorted(
        (o for o in facts.outlook if o.region == region and o.quantity == quantity),
        key=lambda o: o.horizon,
    )


def _png_size(png: bytes) -> tuple[int, int]:
    assert png[:8] == b"\x89PNG\r\n\x1a\n"
    w, h = struct.unpack(">II", png[16:24])
    return int(w), int(h)


def _png_text_keys(png: bytes) -> list[bytes]:
    """Keywords of every tEXt/zTXt/iTXt chunk (PNG spec 11.3.4)."""
    keys, i = [], 8
    while i < len(png):
        (length,) = struct.unpack(">I", png[i : i + 4])
        kind = png[i + 4 : i + 8]
        data = png[i + 8 : i + 8 + length]
        assert (
            zlib.crc32(kind + data) == struct.unpack(">I", png[i + 8 + length : i + 12 + length])[0]
        )
        if kind in (b"tEXt", b"zTXt", b"iTXt"):
            keys.append(data.split(b"\0", 1)[0])
        i += 12 + length
    return keys


def _svg_font_px(svg: str, text: str) -> float:
    """The font size of the SVG ``<text>`` element whose content is exactly ``text``."""
    found = re.findall(rf"<text[^>]*font-size: ([0-9.]+)px[^>]*>{re.escape(text)}</text>", svg)
    assert found, f"no <text> {text!r} in the SVG"
    return float(found[0])


def _dates(values: list[str]) -> np.ndarray:
    return np.array(values, dtype="datetime64[D]")


def _as_dates(xdata: object) -> np.ndarray:
    """Line x-data back to days, whether matplotlib kept datetime64 or converted to floats."""
    x = np.asarray(xdata)
    if np.issubdtype(x.dtype, np.datetime64):
        return x.astype("datetime64[D]")
    return np.array([matplotlib.dates.num2date(v).date() for v in x], dtype="datetime64[D]")


# --------------------------------------------------------------------------------------------
# palette


def test_palette_is_okabe_ito_as_published() -> None:
    # Okabe & Ito (2008): the palette's eight colours, exactly.
    for name, rgb in OKABE_ITO_RGB.items():
        assert charts.OKABE_ITO[name] == "#{:02x}{:02x}{:02x}".format(*rgb), name
    # every data colour of the briefing is one of them
    allowed = {mcolors.to_hex(np.array(rgb) / 255) for rgb in OKABE_ITO_RGB.values()}
    assert set(charts.PALETTE.values()) <= allowed
    assert (
        len(
            {
                charts.PALETTE[k]
                for k in ("weighted_pool", "equal_pool", "quantile_median", "baseline", "threshold")
            }
        )
        == 5
    )


def test_palette_matches_matplotlibs_own_copy() -> None:
    seq = (
        matplotlib.color_sequences.get("okabe_ito")
        if hasattr(matplotlib, "color_sequences")
        else None
    )
    if seq is None:
        pytest.skip("this matplotlib has no okabe_ito colour sequence (added in 3.11)")
    assert [mcolors.to_hex(c) for c in seq] == list(charts.OKABE_ITO.values())


def test_horizon_colours_are_cividis() -> None:
    cmap = matplotlib.colormaps["cividis"]
    got = charts.horizon_colors([1, 2, 3, 4])
    assert got == {
        h: mcolors.to_hex(cmap(s)) for h, s in zip([1, 2, 3, 4], charts.CIVIDIS_STOPS, strict=True)
    }
    assert len(set(got.values())) == 4


# --------------------------------------------------------------------------------------------
# outlook fan chart


@pytest.mark.parametrize("region_kind", ["total", "region"])
def test_fan_chart_draws_the_facts(facts: BriefingFacts, artifacts: Path, region_kind: str) -> None:
    q = "admissions"
    region = (
        facts.total_region
        if region_kind == "total"
        else next(o.region for o in facts.outlook if not o.is_total and o.quantity == q)
    )
    assert region is not None
    rows = _rows(facts, region, q)
    ax = charts.fan_chart(facts, region, q)
    weeks = _dates([o.week_ending for o in rows])

    # two band polygons (one per range), 90% drawn before 50%
    bands = [c for c in ax.collections if isinstance(c, PolyCollection)]
    assert [b.get_gid() for b in bands] == ["band90", "band50"]
    for band, lo, hi in (
        (bands[0], [o.range90[0] for o in rows], [o.range90[1] for o in rows]),
        (bands[1], [o.range50[0] for o in rows], [o.range50[1] for o in rows]),
    ):
        ys = band.get_paths()[0].vertices[:, 1]
        assert set(lo) | set(hi) <= set(ys.tolist())
        assert ys.min() == min(lo)
        assert ys.max() == max(hi)
    assert bands[0].get_alpha() < bands[1].get_alpha()
    assert mcolors.to_hex(bands[0].get_facecolor()[0]) == charts.PALETTE["weighted_pool"]

    median = _one(ax, "median")
    assert list(median.get_ydata()) == [o.median for o in rows]
    assert (_as_dates(median.get_xdata()) == weeks).all()

    baseline = _one(ax, "baseline")
    assert list(baseline.get_ydata()) == [o.baseline_median for o in rows]
    assert baseline.get_linestyle() == "--"
    assert baseline.get_marker() != median.get_marker()

    threshold = _one(ax, "threshold")
    assert set(threshold.get_ydata()) == {rows[0].threshold}
    label = _one(ax, "threshold-label").get_text()
    assert rows[0].threshold_text in label

    issued = _one(ax, "issued")
    assert (_as_dates(issued.get_xdata()) == np.datetime64(facts.issued, "D")).all()
    assert issued.get_linestyle() == ":"

    hist = facts.history[f"{region}|{q}"]
    prov = np.array(hist["provisional"], dtype=bool)
    observed, provisional = _one(ax, "observed"), _one(ax, "provisional")
    assert list(observed.get_ydata()) == list(np.array(hist["value"])[~prov])
    assert list(provisional.get_ydata()) == list(np.array(hist["value"])[prov])
    assert mcolors.to_hex(provisional.get_markerfacecolor()) == "#ffffff"  # hollow
    assert mcolors.to_hex(observed.get_markerfacecolor()) == charts.PALETTE["observed"]

    texts = [t.get_text() for t in ax.get_legend().get_texts()]
    assert any("50% range" in t for t in texts)
    assert any("90% range" in t for t in texts)
    assert any("provisional" in t for t in texts)
    assert ax.get_ylabel() == rows[0].unit
    assert ax.get_ylim()[0] == 0
    _save(_fig(ax), artifacts, f"fan_{q}_{region_kind}")


def test_fan_chart_uses_the_axes_given(facts: BriefingFacts) -> None:
    fig = Figure(figsize=(5, 3))
    ax = fig.add_subplot()
    assert charts.fan_chart(facts, facts.total_region or "", "deaths", ax=ax) is ax
    assert fig.axes == [ax]
    assert _by_gid(ax, "median")


def test_fan_chart_one_horizon_still_shows_both_ranges(
    facts: BriefingFacts, artifacts: Path
) -> None:
    region = facts.total_region or ""
    ax = charts.fan_chart(facts, region, "deaths", horizons=[1])
    bands = [c for c in ax.collections if isinstance(c, PolyCollection)]
    assert len(bands) == 2
    row = _rows(facts, region, "deaths")[0]
    for band, (lo, hi) in zip(bands, (row.range90, row.range50), strict=True):
        v = band.get_paths()[0].vertices
        assert np.ptp(v[:, 0]) > 0  # the block has a width
        assert v[:, 1].min() == lo
        assert v[:, 1].max() == hi
    assert list(_one(ax, "median").get_ydata()) == [row.median]
    _save(_fig(ax), artifacts, "fan_one_horizon")


def test_fan_chart_threshold_far_above_the_data_is_named(
    facts: BriefingFacts, artifacts: Path
) -> None:
    region, q = facts.total_region or "", "admissions"
    far = 100_000.0
    outlook = tuple(
        dataclasses.replace(o, threshold=far, threshold_text="100,000")
        if o.region == region and o.quantity == q
        else o
        for o in facts.outlook
    )
    f2 = dataclasses.replace(facts, outlook=outlook)
    ax = charts.fan_chart(f2, region, q)
    assert set(_one(ax, "threshold").get_ydata()) == {far}
    assert ax.get_ylim()[1] < far  # the data keep the scale
    label = _one(ax, "threshold-label").get_text()
    assert "100,000" in label
    assert "above" in label
    _save(_fig(ax), artifacts, "fan_threshold_off_scale")


def test_fan_chart_without_threshold_or_history(facts: BriefingFacts) -> None:
    region, q = facts.total_region or "", "deaths"
    outlook = tuple(
        dataclasses.replace(
            o, threshold=None, threshold_text=None, threshold_label=None, baseline_median=None
        )
        if o.region == region
        else o
        for o in facts.outlook
    )
    f2 = dataclasses.replace(facts, outlook=outlook, history={})
    ax = charts.fan_chart(f2, region, q)
    assert not _by_gid(ax, "threshold")
    assert not _by_gid(ax, "baseline")
    assert not _by_gid(ax, "observed")
    assert list(_one(ax, "median").get_ydata()) == [o.median for o in _rows(f2, region, q)]


def test_fan_chart_refuses_an_unknown_region_by_name(facts: BriefingFacts) -> None:
    with pytest.raises(ValueError, match=r"region must be one of .*'fernquill'.*got 'atlantis'"):
        charts.fan_chart(facts, "atlantis", "admissions")
    with pytest.raises(ValueError, match=r"quantity must be one of 'admissions', 'deaths'"):
        charts.fan_chart(facts, "fernquill", "cases")


def test_outlook_grid_one_panel_per_region(facts: BriefingFacts, artifacts: Path) -> None:
    q = "deaths"
    fig = charts.outlook_grid(facts, q)
    regions = [r for r in facts.regions if not r["is_total"]]
    panels = [ax for ax in fig.axes if ax.get_visible()]
    assert [ax.get_title(loc="left") for ax in panels] == [r["name"] for r in regions]
    for ax, r in zip(panels, regions, strict=True):
        rows = _rows(facts, str(r["id"]), q)
        assert list(_one(ax, "median").get_ydata()) == [o.median for o in rows]
        assert len([c for c in ax.collections if isinstance(c, PolyCollection)]) == 2
        assert set(_one(ax, "threshold").get_ydata()) == {rows[0].threshold}
    legend_texts = [t.get_text() for t in fig.legends[0].get_texts()]
    assert any("90% range" in t for t in legend_texts)
    assert fig.get_figwidth() == charts.COLUMN_WIDTH
    _save(fig, artifacts, f"outlook_{q}")


# --------------------------------------------------------------------------------------------
# reliability


def _verdicts(facts: BriefingFacts, q: str) -> list[ModelVerdict]:
    return [v for v in facts.verdicts if v.quantity == q]


def _label_boxes(ax: matplotlib.axes.Axes) -> list[tuple[str, object]]:
    fig = _fig(ax)
    fig.draw_without_rendering()
    r = fig.canvas.get_renderer()
    return [
        (str(a.get_gid()), a.get_window_extent(r))
        for a in ax.texts
        if str(a.get_gid()).startswith("label:")
    ]


@pytest.mark.parametrize("q", ["admissions", "deaths"])
def test_reliability_chart_places_every_model(
    facts: BriefingFacts, artifacts: Path, q: str
) -> None:
    ax = charts.reliability_chart(facts, q)
    assert ax.get_xscale() == "log"
    assert ax.get_yscale() == "linear"
    h1 = min(facts.horizons)
    alpha = next(a["alpha"] for a in facts.alpha if a["quantity"] == q and a["horizon"] == h1)
    assert set(_one(ax, "alpha").get_xdata()) == {alpha}
    assert set(_one(ax, "test-level").get_xdata()) == {facts.methods["verdict_test_level"]}

    weights = {
        w["model"]: w["weight"] for w in facts.weights if w["quantity"] == q and w["horizon"] == h1
    }
    sizes = {}
    # the scores the next-week weights were set from (per horizon), when the facts carry them
    rated = {w["model"]: w for w in facts.weights if w["quantity"] == q and w["horizon"] == h1}
    for v in _verdicts(facts, q):
        w = rated.get(v.model, {})
        if v.n_items == 0 and w.get("calibration") is None:
            # nothing scored yet (a new team): no dot to place
            assert not _by_gid(ax, f"model:{v.model}")
            continue
        dot = _one(ax, f"model:{v.model}")
        assert isinstance(dot, PathCollection)
        x, y = dot.get_offsets()[0]
        cal = w.get("calibration") if w.get("calibration") is not None else v.calibration
        info = w.get("information") if w.get("information") is not None else v.information
        assert x == max(cal, charts.CAL_FLOOR)
        assert y == info
        sizes[v.model] = float(dot.get_sizes()[0])
    # dot size follows the weight
    heavy = max(weights, key=weights.get)
    light = min(weights, key=weights.get)
    assert weights[heavy] > weights[light]
    assert sizes[heavy] > sizes[light]
    # the weighted pool is marked at its own scores
    arow = next(a for a in facts.alpha if a["quantity"] == q and a["horizon"] == h1)
    x, y = _one(ax, "weighted_pool").get_offsets()[0]
    assert (x, y) == (arow["pool_calibration"], arow["pool_information"])
    # verdicts are in the legend; each model is named once, and no two names overlap
    texts = [t.get_text() for t in ax.get_legend().get_texts()]
    for verdict in {v.verdict for v in _verdicts(facts, q) if v.model in sizes}:
        assert verdict in texts
    boxes = _label_boxes(ax)
    extra = ["label:combined"]
    if arow.get("equal_pool_calibration") is not None:
        extra.append("label:equal")
    assert sorted(g for g, _b in boxes) == sorted(
        [f"label:{v.model}" for v in _verdicts(facts, q) if v.model in sizes] + extra
    )
    for i, (ga, a) in enumerate(boxes):
        for gb, b in boxes[i + 1 :]:
            assert not a.overlaps(b), f"{ga} overlaps {gb}"
    # without per-horizon scores in the facts the chart says it pools them over horizons
    if not rated or next(iter(rated.values())).get("calibration") is None:
        assert "pool" in _one(ax, "note").get_text()
    _save(_fig(ax), artifacts, f"reliability_{q}")


@pytest.mark.parametrize("q", ["admissions", "deaths"])
@pytest.mark.parametrize("dpi", [200, 72])
def test_reliability_labels_stay_clear_in_the_exported_layout(
    facts: BriefingFacts, q: str, dpi: int
) -> None:
    # the layout the exports use: solved and frozen at the PNG's 200 dpi (as briefing_figures
    # does), then measured at 200 dpi (the PNG) and at 72 (the SVG's user units)
    ax = charts.reliability_chart(facts, q)
    fig = _fig(ax)
    charts._freeze_layout(fig, dpi=200)
    fig.set_dpi(dpi)
    fig.draw_without_rendering()
    r = fig.canvas.get_renderer()
    scale = dpi / 72.0
    dots = {}
    for c in ax.collections:
        gid = str(c.get_gid())
        if isinstance(c, PathCollection) and (gid.startswith("model:") or gid.endswith("_pool")):
            (px, py), rad = (
                ax.transData.transform(c.get_offsets()[0]),
                np.sqrt(c.get_sizes()[0]) / 2,
            )
            dots[gid] = matplotlib.transforms.Bbox.from_extents(
                px - rad * scale, py - rad * scale, px + rad * scale, py + rad * scale
            )
    labels = {
        str(a.get_gid()): a.get_window_extent(r)
        for a in ax.texts
        if str(a.get_gid()).startswith("label:")
    }
    leaders = {str(a.get_gid()): a for a in ax.texts if str(a.get_gid()).startswith("leader:")}
    assert labels
    assert len(dots) == len(labels)
    # leaders are drawn only where the corner is crowded (not in every scenario)
    items = list(labels.items())
    for i, (ga, a) in enumerate(items):
        for gb, b in items[i + 1 :]:
            assert not a.overlaps(b), f"{ga} overlaps {gb} at {dpi} dpi"
        for gd, d in dots.items():
            assert not a.overlaps(d), f"{ga} covers {gd} at {dpi} dpi"
        # the name sits inside the plot area
        assert ax.get_window_extent(r).contains(a.x0, a.y0)
        assert ax.get_window_extent(r).contains(a.x1, a.y1)
    for gl, leader in leaders.items():
        patch = leader.arrow_patch
        ends = patch.get_transform().transform(patch.get_path().vertices)
        line = ends[0] + (ends[-1] - ends[0]) * np.linspace(0, 1, 50)[:, None]
        for ga, a in labels.items():
            if ga == gl.replace("leader:", "label:"):
                continue
            inside = (line[:, 0] > a.x0) & (line[:, 0] < a.x1)
            inside &= (line[:, 1] > a.y0) & (line[:, 1] < a.y1)
            assert not inside.any(), f"{gl} runs through {ga} at {dpi} dpi"
    charts._close(fig)


def test_reliability_chart_prefers_per_horizon_scores(facts: BriefingFacts) -> None:
    # when the facts' weights carry the per-horizon scores, those are what is placed
    q, h = "admissions", 2
    weights = tuple(
        {**w, "calibration": 0.5 + i / 100, "information": 1.0 + i / 10}
        if w["quantity"] == q and w["horizon"] == h
        else w
        for i, w in enumerate(facts.weights)
    )
    eq = tuple(
        {**a, "equal_pool_calibration": 0.3, "equal_pool_information": 0.4}
        if a["quantity"] == q and a["horizon"] == h
        else a
        for a in facts.alpha
    )
    f2 = dataclasses.replace(facts, weights=weights, alpha=eq)
    ax = charts.reliability_chart(f2, q, horizon=h)
    for i, w in enumerate(weights):
        if w["quantity"] == q and w["horizon"] == h:
            x, y = _one(ax, f"model:{w['model']}").get_offsets()[0]
            assert (x, y) == (0.5 + i / 100, 1.0 + i / 10)
    assert tuple(_one(ax, "equal_pool").get_offsets()[0]) == (0.3, 0.4)
    assert not _by_gid(ax, "note")
    alpha = next(a["alpha"] for a in f2.alpha if a["quantity"] == q and a["horizon"] == h)
    assert set(_one(ax, "alpha").get_xdata()) == {alpha}


def test_reliability_chart_refuses_a_horizon_not_shown(facts: BriefingFacts) -> None:
    with pytest.raises(ValueError, match=r"horizon must be one of 1, 2, 3, 4; got 9"):
        charts.reliability_chart(facts, "admissions", horizon=9)


# --------------------------------------------------------------------------------------------
# weights


@pytest.mark.parametrize("q", ["admissions", "deaths"])
def test_weights_chart_bar_lengths_are_the_weights(
    facts: BriefingFacts, artifacts: Path, q: str
) -> None:
    ax = charts.weights_chart(facts, q)
    models = [t.get_text() for t in ax.get_yticklabels()]
    assert models == [v.model for v in _verdicts(facts, q)]
    table = {(w["model"], w["horizon"]): w["weight"] for w in facts.weights if w["quantity"] == q}
    for h in facts.horizons:
        bars = [p for p in ax.patches if p.get_gid() == f"weights-h{h}"]
        assert [b.get_width() for b in bars] == [table[(m, h)] for m in models]
    # a model without weight says why
    zero = [m for m in models if all(table[(m, h)] == 0 for h in facts.horizons)]
    assert zero
    for m in zero:
        assert _one(ax, f"no-weight:{m}").get_text().startswith("no weight")
    _save(_fig(ax), artifacts, f"weights_{q}")


# --------------------------------------------------------------------------------------------
# track record


def _track(facts: BriefingFacts, q: str, method: str) -> list[TrackRow]:
    return sorted(
        (t for t in facts.track if t.quantity == q and t.method == method), key=lambda t: t.horizon
    )


@pytest.mark.parametrize("q", ["admissions", "deaths"])
def test_track_chart_lines_are_relative_wis(facts: BriefingFacts, q: str) -> None:
    ax = charts.track_chart(facts, q)
    base = facts.methods["baseline"]
    for method, gid in (
        ("weighted_pool", "track:weighted_pool"),
        ("equal_pool", "track:equal_pool"),
        ("quantile_median", "track:quantile_median"),
        (base, "track:baseline"),
    ):
        line = _one(ax, gid)
        rows = _track(facts, q, method)
        assert list(line.get_xdata()) == [t.horizon for t in rows]
        assert list(line.get_ydata()) == [t.relative_wis for t in rows]
    assert set(_one(ax, "track:baseline").get_ydata()) == {1.0}
    styles = {
        _one(ax, g).get_linestyle()
        for g in (
            "track:weighted_pool",
            "track:equal_pool",
            "track:quantile_median",
            "track:baseline",
        )
    }
    assert len(styles) == 4  # told apart without colour


@pytest.mark.parametrize("q", ["admissions", "deaths"])
def test_coverage_chart_counts_are_the_facts(facts: BriefingFacts, q: str) -> None:
    ax = charts.coverage_chart(facts, q)
    base = facts.methods["baseline"]
    texts = [t.get_text() for t in ax.texts]
    for method, key in (
        ("weighted_pool", "weighted_pool"),
        ("equal_pool", "equal_pool"),
        ("quantile_median", "quantile_median"),
        (base, "baseline"),
    ):
        for t in _track(facts, q, method):
            (bar,) = [p for p in ax.patches if p.get_gid() == f"cover:{key}:h{t.horizon}"]
            (outline,) = [p for p in ax.patches if p.get_gid() == f"cover-all:{key}:h{t.horizon}"]
            assert bar.get_width() == t.in_90
            assert outline.get_width() == t.n_items
            assert f"in {t.in_90_text}" in [s.strip() for s in texts]


def test_track_figure_and_alt_text(facts: BriefingFacts, artifacts: Path) -> None:
    fig = charts.track_figure(facts, "admissions")
    assert len(fig.axes) == 2
    _save(fig, artifacts, "track_admissions")
    alt = charts.track_alt_text(facts, "admissions")
    wp = _track(facts, "admissions", "weighted_pool")
    assert wp[0].vs_baseline_text in alt
    assert wp[0].in_90_text in alt
    assert wp[0].relative_wis_text in alt
    assert f"last {facts.track_weeks} issue dates" in alt


# --------------------------------------------------------------------------------------------
# alt texts


def test_fan_alt_text_has_the_facts_numbers(facts: BriefingFacts) -> None:
    for region in {o.region for o in facts.outlook}:
        for q in ("admissions", "deaths"):
            rows = _rows(facts, region, q)
            a, z = rows[0], rows[-1]
            alt = charts.fan_alt_text(facts, region, q)
            for part in (
                a.region_name,
                a.median_text,
                a.range90_low_text,
                a.range90_high_text,
                a.week_ending_text,
                z.median_text,
                z.week_ending_text,
                a.last_value_text,
                facts.issued_text,
            ):
                assert part in alt, (part, alt)
            if a.threshold is not None:
                assert f"{a.threshold_label} is at {a.threshold_text}" in alt
                assert f"{a.p_above_threshold_text} chance" in alt
            assert ("provisional" in alt) == a.last_provisional


def test_outlook_reliability_weights_alt_texts(facts: BriefingFacts) -> None:
    q = "admissions"
    alt = charts.outlook_alt_text(facts, q)
    for o in facts.outlook:
        if o.quantity == q and o.horizon == 1 and not o.is_total:
            assert f"{o.region_name} about {o.median_text} (9 in 10 chance {o.range90_text})" in alt
    alt = charts.reliability_alt_text(facts, q)
    for v in _verdicts(facts, q):
        assert v.model in alt
    alpha = next(a["alpha"] for a in facts.alpha if a["quantity"] == q and a["horizon"] == 1)
    assert f"{alpha:.3g}" in alt
    alt = charts.weights_alt_text(facts, q)
    for w in facts.weights:
        if w["quantity"] == q and w["weight"] > 0:
            assert f"{w['model']} {w['weight']:.2f}" in alt


# --------------------------------------------------------------------------------------------
# exports


def _reliability_fig(facts: BriefingFacts) -> Figure:
    return _fig(charts.reliability_chart(facts, "admissions"))


def _fan_fig(facts: BriefingFacts) -> Figure:
    return _fig(charts.fan_chart(facts, facts.total_region or "", "admissions"))


@pytest.mark.parametrize("make", [_fan_fig, _reliability_fig])
def test_exports_are_byte_identical_across_renders(facts: BriefingFacts, make: object) -> None:
    assert callable(make)
    svg = [charts.figure_svg(make(facts), title="t", description="d") for _ in range(2)]
    png = [charts.figure_png(make(facts)) for _ in range(2)]
    assert svg[0] == svg[1]
    assert png[0] == png[1]


def test_svg_text_is_real_text(facts: BriefingFacts) -> None:
    svg = charts.figure_svg(_fan_fig(facts), title="Outlook", description="A fan chart")
    assert "<text" in svg
    assert "DejaVu Sans" in svg
    assert "week ending" in svg  # a label, searchable
    assert "<dc:date>" not in svg
    assert "<dc:title>Outlook</dc:title>" in svg
    assert "<dc:description>A fan chart</dc:description>" in svg


@pytest.mark.parametrize("dpi", [100, 200])
def test_png_pixels_are_inches_times_dpi(facts: BriefingFacts, dpi: int) -> None:
    fig = _fan_fig(facts)
    w_in, h_in = fig.get_size_inches()
    png = charts.figure_png(fig, dpi=dpi)
    assert _png_size(png) == (round(w_in * dpi), round(h_in * dpi))
    assert b"Software" not in _png_text_keys(png)


def test_exports_close_the_figure(facts: BriefingFacts) -> None:
    fig = _fan_fig(facts)
    charts.figure_png(fig)
    assert fig.axes == []  # released


def _rebuild(d: dict) -> BriefingFacts:
    """BriefingFacts from its JSON form (as an archive's facts.json holds it)."""
    return BriefingFacts(
        **{
            **d,
            "outlook": tuple(
                OutlookRow(**{**o, "range50": tuple(o["range50"]), "range90": tuple(o["range90"])})
                for o in d["outlook"]
            ),
            "verdicts": tuple(
                ModelVerdict(**{**v, "bins": tuple(v["bins"])}) for v in d["verdicts"]
            ),
            "track": tuple(TrackRow(**t) for t in d["track"]),
            "horizons": tuple(d["horizons"]),
        }
    )


def test_no_pyplot_state(facts: BriefingFacts, tmp_path: Path) -> None:
    # drawing and exporting never touches pyplot's global figures (a clean interpreter)
    path = tmp_path / "facts.json"
    path.write_text(json.dumps(facts.to_dict()), encoding="utf-8")
    code = (
        "import json, sys\n"
        "from test_charts import _rebuild\n"
        "from forebrief.report import charts\n"
        f"f = _rebuild(json.loads(open({str(path)!r}, encoding='utf-8').read()))\n"
        "charts.figure_png(charts.outlook_grid(f, 'admissions'))\n"
        "charts.figure_svg(charts._figure_of(charts.reliability_chart(f, 'deaths')))\n"
        "print(json.dumps('matplotlib.pyplot' in sys.modules))\n"
    )
    here = Path(__file__).resolve().parent
    out = subprocess.run(
        [sys.executable, "-W", "error", "-c", code],
        capture_output=True,
        text=True,
        check=True,
        cwd=here,
        env={"MPLBACKEND": "Agg", "PYTHONPATH": str(here)},
    )
    assert json.loads(out.stdout) is False


# --------------------------------------------------------------------------------------------
# the whole set


def test_briefing_figures_every_chart_ready_to_place(facts: BriefingFacts, artifacts: Path) -> None:
    specs = charts.briefing_figures(facts)
    keys = [s.key for s in specs]
    total = facts.total_region
    assert keys == [
        k
        for q in ("admissions", "deaths")
        for k in (
            f"fan_{q}_{total}",
            f"outlook_{q}",
            f"reliability_{q}",
            f"weights_{q}",
            f"track_{q}",
        )
    ]
    for s in specs:
        with pytest.raises(dataclasses.FrozenInstanceError):
            s.key = "x"  # type: ignore[misc]
        assert s.title
        assert not s.title.endswith(".")
        assert s.caption
        assert s.alt
        assert s.svg.lstrip().startswith("<?xml")
        assert "<text" in s.svg
        assert f"<dc:description>{s.alt[:40]}" in s.svg.replace("&apos;", "'")
        w, _h = _png_size(s.png)
        assert w == round(charts.COLUMN_WIDTH * 200)
        assert s.section in {"outlook", "trust", "track"}
        (artifacts / f"set_{s.key}.png").write_bytes(s.png)
    fan = specs[0]
    row = _rows(facts, total or "", "admissions")[0]
    assert row.median_text in fan.alt
    assert row.range90_text.replace(" to ", " and ") in fan.alt
    import matplotlib.pyplot as plt  # only to confirm nothing was left open

    assert plt.get_fignums() == []


def test_email_figures_one_larger_text_fan_for_the_mail_column(
    facts: BriefingFacts, artifacts: Path
) -> None:
    specs = charts.email_figures(facts, dpi=200)
    assert len(specs) == 1
    (spec,) = specs
    q, total = facts.summary["lead_quantity"], facts.total_region
    assert spec.key == f"email_fan_{q}_{total}"
    assert spec.section == "email"
    # pixels = inches x dpi (a PNG's IHDR width and height, PNG spec 11.2.2)
    w_in, h_in = charts.EMAIL_FAN_SIZE
    assert _png_size(spec.png) == (round(w_in * 200), round(h_in * 200))
    assert b"Software" not in _png_text_keys(spec.png)
    again = charts.email_figures(facts, dpi=200)[0]
    assert again.png == spec.png
    assert again.svg == spec.svg
    # same words as the PDF's fan chart of the same region
    pdf_fan = next(s for s in charts.briefing_figures(facts) if s.key == f"fan_{q}_{total}")
    assert (spec.title, spec.caption, spec.alt) == (pdf_fan.title, pdf_fan.caption, pdf_fan.alt)
    row = _rows(facts, total or "", q)[0]
    assert row.median_text in spec.alt
    # every text is drawn EMAIL_TEXT_SCALE times the PDF's size: axis label, a tick, the legend
    for text in (row.unit, "Oct", "observed"):
        assert _svg_font_px(spec.svg, text) == pytest.approx(
            _svg_font_px(pdf_fan.svg, text) * charts.EMAIL_TEXT_SCALE, abs=0.01
        ), text
    (artifacts / f"{spec.key}.png").write_bytes(spec.png)


def test_email_figures_without_a_total_use_the_first_region(facts: BriefingFacts) -> None:
    no_total = dataclasses.replace(facts, total_available=False)
    q = facts.summary["lead_quantity"]
    first = next(o for o in facts.outlook if o.quantity == q)
    (spec,) = charts.email_figures(no_total, dpi=60)
    assert spec.key == f"email_fan_{q}_{first.region}"
    assert spec.alt == charts.fan_alt_text(facts, first.region, q)


def test_facts_from_the_archive_give_the_same_figures(facts: BriefingFacts) -> None:
    # facts read back from facts.json (lists, not tuples) draw the same chart, byte for byte
    back = _rebuild(json.loads(json.dumps(facts.to_dict())))
    assert charts.figure_svg(_fan_fig(back)) == charts.figure_svg(_fan_fig(facts))
    assert charts.figure_svg(_reliability_fig(back)) == charts.figure_svg(_reliability_fig(facts))
