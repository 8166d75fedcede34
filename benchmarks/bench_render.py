"""Benchmark of the briefing's rendering (a script, not a test).

Two parts:

* ``demo``: the invented demo's full weekly run, from writing the scenario to the sealed
  record (validation, scoring, ensembles, back-test, facts, charts, HTML, PDF/A, e-mail),
  timed stage by stage. Target: under 60 s.
* ``regions``: a 50-region briefing's rendering (charts, screen HTML, print HTML, PDF). Its
  facts are the demo's with the six regions replicated to 50 (each copy keeps its source
  region's numbers under a new id and name), so the regional chart grid has 50 panels.
  Target: under 30 s.

Run ``python benchmarks/bench_render.py`` (both parts) or ``--part demo`` / ``--part regions``;
``--out DIR`` keeps the outputs (default: a temporary folder).
"""

from __future__ import annotations

import argparse
import dataclasses
import datetime as dt
import tempfile
import time
from collections.abc import Callable, Mapping
from pathlib import Path
from typing import Any, TypeVar

from forebrief.app.config import load_config
from forebrief.app.pipeline import record_briefing
from forebrief.demo import generate_scenario, write_scenario
from forebrief.report.charts import briefing_figures
from forebrief.report.facts import BriefingFacts
from forebrief.report.narrative import build_narrative
from forebrief.report.render import render_html, render_pdf

T = TypeVar("T")
CREATED = dt.datetime(2026, 11, 30, tzinfo=dt.UTC)


def _timed(label: str, fn: Callable[[], T], times: dict[str, float]) -> T:
    t0 = time.perf_counter()
    out = fn()
    times[label] = time.perf_counter() - t0
    return out


def bench_demo(out: Path) -> tuple[dict[str, float], Any]:
    """The demo's weekly run with rendering; seconds per stage and in total."""
    times: dict[str, float] = {}
    marks: list[tuple[str, float]] = []
    t0 = time.perf_counter()
    _timed("write the scenario", lambda: write_scenario(generate_scenario(), out), times)
    cfg = load_config(out / "forebrief.toml")

    def stage(name: str) -> None:
        marks.append((name, time.perf_counter()))

    outcome = record_briefing(cfg, stage=stage, created=CREATED)
    end = time.perf_counter()
    for (name, start), (_, stop) in zip(marks, [*marks[1:], ("end", end)], strict=True):
        times[name] = times.get(name, 0.0) + stop - start
    times["total"] = end - t0
    return times, outcome


def _renamed(item: Mapping[str, Any], region: str, name: str) -> dict[str, Any]:
    d = dict(item)
    d["region"] = region
    if "region_name" in d:
        d["region_name"] = name
    return d


def replicate_regions(facts: BriefingFacts, n_regions: int = 50) -> BriefingFacts:
    """The facts with the non-total regions copied round-robin to ``n_regions`` regions.

    Copy k of region r has id ``<r>-<k>`` and name ``<name> <k>``; its outlook rows, history
    and calibration notes are those of r. The total and the model-level facts are unchanged.
    O(n_regions x rows per region).
    """
    base = [r for r in facts.regions if not r["is_total"]]
    total = [r for r in facts.regions if r["is_total"]]
    copies: list[tuple[Mapping[str, Any], str, str]] = []
    for k in range(n_regions):
        src = base[k % len(base)]
        copies.append((src, f"{src['id']}-{k + 1}", f"{src['name']} {k // len(base) + 1}"))
    regions = tuple(total) + tuple({**src, "id": rid, "name": name} for src, rid, name in copies)
    by_region: dict[str, list[Any]] = {}
    for o in facts.outlook:
        by_region.setdefault(o.region, []).append(o)
    outlook = [o for r in total for o in by_region.get(str(r["id"]), [])]
    history = {
        k: v for k, v in facts.history.items() if any(k.startswith(f"{r['id']}|") for r in total)
    }
    calibration = []
    for src, rid, name in copies:
        outlook += [
            dataclasses.replace(o, region=rid, region_name=name)
            for o in by_region.get(str(src["id"]), [])
        ]
        for key, series in facts.history.items():
            region, _, quantity = key.partition("|")
            if region == src["id"]:
                history[f"{rid}|{quantity}"] = _renamed(series, rid, name)
        calibration += [
            _renamed(c, rid, name) for c in facts.calibration_by_region if c["region"] == src["id"]
        ]
    return dataclasses.replace(
        facts,
        regions=regions,
        outlook=tuple(outlook),
        history=history,
        calibration_by_region=tuple(calibration),
    )


def bench_regions(facts: BriefingFacts, out: Path, n_regions: int = 50) -> dict[str, float]:
    """Rendering a briefing of ``n_regions`` regions; seconds per step and in total."""
    times: dict[str, float] = {}
    big = _timed("replicate the facts", lambda: replicate_regions(facts, n_regions), times)
    narrative = _timed("narrative", lambda: build_narrative(big), times)
    charts = _timed("charts", lambda: briefing_figures(big), times)
    grids = [c for c in charts if c.key.startswith("outlook_")]
    assert grids, "no regional chart grid was drawn"
    html = _timed("screen HTML", lambda: render_html(big, narrative, charts), times)
    print_html = _timed(
        "print HTML",
        lambda: render_html(big, narrative, charts, for_print=True, images="svg"),
        times,
    )
    pdf = _timed("PDF", lambda: render_pdf(print_html), times)
    times["total (rendering)"] = sum(
        v for k, v in times.items() if k not in ("replicate the facts",)
    )
    (out / "briefing-50.html").write_text(html, encoding="utf-8")
    (out / "briefing-50.pdf").write_bytes(pdf)
    panels = sum(1 for r in big.regions if not r["is_total"])
    print(
        f"  {panels} regions in the grid; {len(charts)} charts; HTML "
        f"{len(html) / 1e6:.1f} MB; PDF {len(pdf) / 1e3:.0f} kB"
    )
    return times


def _report(title: str, times: Mapping[str, float], target: float, key: str) -> None:
    print(title)
    for k, v in times.items():
        print(f"  {k:<28} {v:7.2f} s")
    verdict = "within" if times[key] < target else "OVER"
    print(f"  -> {times[key]:.1f} s, {verdict} the {target:.0f} s target")


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--part", choices=("all", "demo", "regions"), default="all")
    ap.add_argument("--regions", type=int, default=50)
    ap.add_argument("--out", type=Path, default=None)
    args = ap.parse_args(argv)
    with tempfile.TemporaryDirectory(prefix="forebrief-bench-render-") as tmp:
        out = args.out or Path(tmp)
        out.mkdir(parents=True, exist_ok=True)
        if (out / "demo").exists():
            print(
                f"{out / 'demo'} exists; the demo is written into a new folder; fix: remove "
                "it or pass another --out"
            )
            return 1
        demo_times, outcome = bench_demo(out / "demo")
        if args.part in ("all", "demo"):
            _report("demo: full weekly run with rendering", demo_times, 60.0, "total")
        if args.part in ("all", "regions"):
            times = bench_regions(outcome.run.facts, out, args.regions)
            _report(f"{args.regions}-region briefing: rendering", times, 30.0, "total (rendering)")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
