"""One weekly record from a configuration: read and check inputs, run, write the record.

This is the library behind ``forebrief brief`` and ``forebrief demo``; the command line only
parses flags and prints.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path

import pandas as pd

from forebrief import __version__
from forebrief.archive import latest_record_before, read_facts, record_dir, write_record
from forebrief.config import BriefingConfig
from forebrief.errors import ArchiveError
from forebrief.validate import Problem
from forebrief.weekly import STAGES, BriefingRun, latest_issue_date, run_briefing
from forebrief.workflow import load_inputs

__all__ = ["RecordOutcome", "record_briefing"]


@dataclass(frozen=True)
class RecordOutcome:
    record: Path
    run: BriefingRun
    problems: tuple[Problem, ...]


def record_briefing(
    cfg: BriefingConfig,
    *,
    issued: pd.Timestamp | None = None,
    stage: Callable[[str], None] | None = None,
) -> RecordOutcome:
    """Validate, compute and write the record ``ARCHIVE/<issue date>/``; refuse if it exists."""
    step = stage or (lambda _name: None)
    step(STAGES[0])
    inputs = load_inputs(cfg.forecasts, cfg.observations, columns=cfg.columns,
                         signed=cfg.signed, as_of=issued)
    d = issued or latest_issue_date(inputs.forecasts.table, baseline=cfg.baseline)
    final = record_dir(cfg.archive, d)
    if final.exists():
        raise ArchiveError(
            f"{final}: a record for {d:%Y-%m-%d} already exists and is never overwritten; "
            "nothing was changed; fix: use another archive folder, or --issued for another date"
        )
    prev_dir = latest_record_before(cfg.archive, d)
    previous = read_facts(prev_dir) if prev_dir else None
    run = run_briefing(cfg, inputs, issued=d, previous=previous, stage=step)
    step(STAGES[-1])
    problems = "\n".join(p.line() for p in inputs.problems)
    record = write_record(
        cfg.archive,
        d,
        tables=run.tables(),
        texts={"briefing.txt": run.text, "problems.txt": problems + ("\n" if problems else "")},
        json_files={"facts.json": run.facts.to_dict(),
                    "ensemble_summary.json": run.ensemble.summary},
        inputs=[Path(f) for f in (*inputs.forecasts.files, *inputs.observations.files)],
        manifest_extra={
            "tool": "forebrief",
            "tool_version": __version__,
            "config": cfg.as_dict(),
            "previous_record": prev_dir.name if prev_dir else None,
        },
    )
    return RecordOutcome(record, run, inputs.problems)
