"""One weekly record from a configuration: read and check inputs, run, render, write, and
reproduce a record from what it archived.

This is the library behind ``forebrief brief``, ``forebrief demo`` and ``forebrief archive
reproduce``; the command line only parses flags and prints.
"""

from __future__ import annotations

import datetime as dt
import gzip
import tempfile
from collections.abc import Callable, Mapping
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Any

import pandas as pd

from forebrief.app.config import BriefingConfig, config_from_dict
from forebrief.app.weekly import STAGES, BriefingRun, latest_issue_date, run_briefing
from forebrief.app.workflow import load_inputs
from forebrief.errors import ArchiveError
from forebrief.io.outputs import csv_bytes, json_bytes
from forebrief.record import (
    MANIFEST,
    ArchiveRecord,
    InputFile,
    find_record,
    latest_record_before,
    list_records,
    read_facts,
    write_record,
)
from forebrief.tables.validate import Problem
from forebrief.version import __version__

__all__ = [
    "RecordOutcome",
    "Rendered",
    "ReproduceReport",
    "record_briefing",
    "render_briefing",
    "reproduce_record",
]

#: Files of the PDF/A-3 briefing that travel inside it as attachments.
PDF_ATTACHMENTS: tuple[str, ...] = ("facts.json", "ensemble.csv", "scores_by_model.csv", MANIFEST)


@dataclass(frozen=True)
class Rendered:
    """The briefing on screen, and the chart images by file name."""

    html: str
    print_html: str
    charts: tuple[Any, ...]
    images: dict[str, bytes]


@dataclass(frozen=True)
class RecordOutcome:
    record: ArchiveRecord
    run: BriefingRun
    problems: tuple[Problem, ...]


def render_briefing(run: BriefingRun) -> Rendered:
    """HTML for screen (PNG charts embedded) and for print (SVG charts, searchable text)."""
    from forebrief.report.charts import briefing_figures
    from forebrief.report.render import render_html

    cfg = run.config
    charts = tuple(briefing_figures(run.facts))
    html = render_html(run.facts, run.narrative, charts, templates_dir=cfg.templates_dir)
    print_html = render_html(
        run.facts,
        run.narrative,
        charts,
        templates_dir=cfg.templates_dir,
        for_print=True,
        paper=cfg.paper,
        images="svg",
    )
    images = {f"charts/{c.key}.png": c.png for c in charts}
    return Rendered(html, print_html, charts, images)


def _data_files(run: BriefingRun, rendered: Rendered) -> dict[str, bytes]:
    problems = "\n".join(p.line() for p in run.inputs.problems)
    files: dict[str, bytes] = {name: csv_bytes(frame) for name, frame in run.tables().items()}
    files.update(
        {
            "briefing.txt": run.text.encode("utf-8"),
            "briefing.html": rendered.html.encode("utf-8"),
            "problems.txt": (problems + ("\n" if problems else "")).encode("utf-8"),
            "facts.json": json_bytes(run.facts.to_dict()),
            "ensemble_summary.json": json_bytes(run.ensemble.summary),
            **rendered.images,
        }
    )
    return files


def _decisions(run: BriefingRun) -> dict[str, Any]:
    """The analysis decisions a later reader needs, in plain data."""
    cfg = run.config
    w = run.ensemble.weights
    members = [
        {
            "model": r.model,
            "quantity": r.quantity,
            "horizon": int(r.horizon),
            "weight": round(float(r.weight), 6),
            "status": r.status,
        }
        for r in w.itertuples(index=False)
    ]
    excluded = [
        {k: str(v) for k, v in row.items()} for row in run.inputs.excluded.to_dict(orient="records")
    ]
    obs = run.inputs.observations.table
    vintage = None
    if "reported" in obs and obs["reported"].notna().any():
        used = obs.loc[obs["reported"] <= run.issued, "reported"]
        vintage = None if used.empty else f"{used.max():%Y-%m-%d}"
    return {
        "issued": f"{run.issued:%Y-%m-%d}",
        "window_weeks": cfg.window,
        "alpha": [
            {
                "quantity": g["quantity"],
                "horizon": g["horizon"],
                "alpha": g["alpha"],
                "how": (
                    "optimised: the cutoff that gave the weighted pool the highest "
                    "combined score on the window"
                    if g["alpha_mode"] == "auto"
                    else "fixed in the configuration"
                ),
                "equal_weight_fallback": g["equal_weight_fallback"],
            }
            for g in run.ensemble.summary["groups"]
        ],
        "members": members,
        "excluded": excluded,
        "data_as_of": run.facts.data_as_of,
        "latest_vintage_used": vintage,
        "history_as_of": run.ensemble.summary.get("history_as_of"),
        "baseline": cfg.baseline,
        "baseline_generated": run.baseline_generated,
        "settle_weeks": dict(run.settle),
        "headline": [dict(h) for h in run.headline],
    }


def _sealer(
    run: BriefingRun, rendered: Rendered, created: dt.datetime
) -> Callable[[bytes, Mapping[str, bytes]], Mapping[str, bytes]]:
    """Build the PDF/A-3b (data attached) and the e-mail once the manifest is known."""

    def seal(manifest: bytes, files: Mapping[str, bytes]) -> dict[str, bytes]:
        from forebrief.report.charts import email_figures
        from forebrief.report.render.pdf import render_pdf

        attached = {
            name: files.get(name, manifest if name == MANIFEST else b"") for name in PDF_ATTACHMENTS
        }
        attached[MANIFEST] = manifest
        pdf = render_pdf(
            rendered.print_html,
            pdf_variant="pdf/a-3b",
            attachments=attached,
            identifier=f"forebrief-{run.issued:%Y-%m-%d}".encode(),
            created=created,
        )
        out = {"briefing.pdf": pdf}
        try:
            from forebrief.report.render.email import build_message
        except ImportError:  # pragma: no cover - during development only
            return out
        # the e-mail gets its own fan chart, drawn for its narrower column; it is not one
        # of the record's charts/ files
        charts = (*rendered.charts, *email_figures(run.facts))
        msg = build_message(
            run.facts,
            run.narrative,
            charts,
            pdf,
            email=_email_or_placeholder(run.config.email),
            created=created,
            templates_dir=run.config.templates_dir,
        )
        out["briefing.eml"] = msg.as_bytes()
        return out

    return seal


def _label_root(cfg: BriefingConfig) -> Path | None:
    """Inputs are named relative to the configuration's folder (or the working folder)."""
    return cfg.source.parent if cfg.source is not None else Path.cwd()


#: Reserved names (RFC 2606 ".invalid") used when the configuration sets no addresses, so
#: every record still holds its e-mail; ``forebrief send --to`` gives the real recipients.
PLACEHOLDER_SENDER = "briefing@forebrief.invalid"
PLACEHOLDER_RECIPIENT = "recipients-not-configured@forebrief.invalid"


def _email_or_placeholder(email: Any) -> Any:
    changes: dict[str, Any] = {}
    if not email.sender:
        changes["sender"] = PLACEHOLDER_SENDER
    if not email.to:
        changes["to"] = (PLACEHOLDER_RECIPIENT,)
    return replace(email, **changes) if changes else email


def _input_files(inputs: Any, label_root: Path | None) -> list[InputFile]:
    out = []
    for role, validated in (("forecasts", inputs.forecasts), ("observations", inputs.observations)):
        for label in validated.files:
            path = Path(label)
            if not path.is_absolute() and label_root is not None:
                path = label_root / path
            out.append(InputFile(path, label, role))
    return out


def record_briefing(
    cfg: BriefingConfig,
    *,
    issued: pd.Timestamp | None = None,
    stage: Callable[[str], None] | None = None,
    revise_reason: str | None = None,
    created: dt.datetime | None = None,
    _crash_hook: Callable[[str], None] | None = None,
) -> RecordOutcome:
    """Validate, compute, render and write the record ``ARCHIVE/<issue date>/``.

    Refuses when the record exists, unless ``revise_reason`` is given: then it writes the next
    revision (``<date>-r2``, ...), which records its reason and the record it supersedes.
    """
    step = stage or (lambda _name: None)
    step(STAGES[0])
    root = _label_root(cfg)
    inputs = load_inputs(
        cfg.forecasts,
        cfg.observations,
        columns=cfg.columns,
        signed=cfg.signed,
        as_of=issued,
        label_root=root,
    )
    d = (
        pd.Timestamp(issued)
        if issued is not None
        else latest_issue_date(inputs.forecasts.table, baseline=cfg.baseline)
    )
    existing = [r for r in list_records(cfg.archive) if r.issued == f"{d:%Y-%m-%d}"]
    if revise_reason is not None and not existing:
        raise ArchiveError(
            f"{cfg.archive}: there is no record for {d:%Y-%m-%d} to revise; fix: run without "
            "--revise to write the first record for that date"
        )
    if existing and revise_reason is None:
        raise ArchiveError(
            f"{existing[-1].path}: a record for {d:%Y-%m-%d} already exists and is never "
            'overwritten; nothing was changed; fix: pass --revise --reason "..." to write a '
            "revision, or use another archive folder or --issued date"
        )
    prev_dir = latest_record_before(cfg.archive, d)
    previous = read_facts(prev_dir) if prev_dir else None
    run = run_briefing(cfg, inputs, issued=d, previous=previous, stage=step)
    step("rendering")
    rendered = render_briefing(run)
    step(STAGES[-1])
    created = created or dt.datetime.now(dt.UTC).replace(microsecond=0)
    files = _data_files(run, rendered)
    record = write_record(
        cfg.archive,
        d,
        files=files,
        inputs=_input_files(inputs, root),
        manifest={
            "tool": "forebrief",
            "tool_version": __version__,
            "created": created.isoformat(),
            "title": cfg.title,
            "headline": " ".join(run.narrative.headline),
            "config": cfg.as_dict(),
            "input_specs": _input_specs(cfg, root),
            "compared_with": prev_dir.name if prev_dir else None,
            "decisions": _decisions(run),
        },
        seal=_sealer(run, rendered, created),
        revise_reason=revise_reason,
        _crash_hook=_crash_hook,
    )
    return RecordOutcome(record, run, inputs.problems)


def _input_specs(cfg: BriefingConfig, root: Path | None) -> dict[str, list[str]]:
    from forebrief.app.workflow import input_label

    return {
        "forecasts": [input_label(Path(p), root) for p in cfg.forecasts],
        "observations": [input_label(Path(p), root) for p in cfg.observations],
    }


# --------------------------------------------------------------------------------------------
# reproduce


@dataclass(frozen=True)
class ReproduceReport:
    record: str
    identical: tuple[str, ...]
    different: tuple[str, ...]
    missing: tuple[str, ...]

    @property
    def ok(self) -> bool:
        return not self.different and not self.missing


def _inside(label: str) -> str:
    """A relative path that cannot leave the folder it is joined to (as archived)."""
    return label.lstrip("/").replace("..", "_")


def reproduce_record(archive: Path, date: str) -> ReproduceReport:
    """Rerun a record's analysis from its archived inputs and configuration; compare outputs."""
    rec = find_record(archive, date)
    m = rec.manifest
    with tempfile.TemporaryDirectory(prefix="forebrief-reproduce-") as tmp:
        root = Path(tmp)
        for item in m.get("inputs", []):
            blob = (rec.path / item["stored"]).read_bytes()
            target = root / _inside(item["label"])
            target.parent.mkdir(parents=True, exist_ok=True)
            target.write_bytes(gzip.decompress(blob))
        cfg = config_from_dict(m["config"])
        specs = m.get("input_specs", {})
        cfg = replace(
            cfg,
            source=root / "forebrief.toml",
            forecasts=tuple(root / _inside(s) for s in specs.get("forecasts", [])),
            observations=tuple(root / _inside(s) for s in specs.get("observations", [])),
            archive=root / "archive",
        )
        inputs = load_inputs(
            cfg.forecasts, cfg.observations, columns=cfg.columns, signed=cfg.signed, label_root=root
        )
        previous = None
        if m.get("compared_with"):
            previous = read_facts(archive / m["compared_with"])
        run = run_briefing(cfg, inputs, issued=pd.Timestamp(m["issued"]), previous=previous)
        rendered = render_briefing(run)
        files = _data_files(run, rendered)
        created = dt.datetime.fromisoformat(m["created"])
        manifest_bytes = (rec.path / MANIFEST).read_bytes()
        files.update(_sealer(run, rendered, created)(manifest_bytes, files))
    identical, different, missing = [], [], []
    expected = [o["path"] for o in m.get("outputs", [])] + ["briefing.pdf", "briefing.eml"]
    for name in expected:
        path = rec.path / name
        if name not in files:
            continue
        if not path.is_file():
            missing.append(name)
        elif path.read_bytes() == files[name]:
            identical.append(name)
        else:
            different.append(name)
    return ReproduceReport(rec.name, tuple(identical), tuple(different), tuple(missing))
