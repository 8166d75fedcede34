"""Write the demo scenario as example input files (the only part of the demo that touches files).

Layout under the output folder::

    forebrief.toml                         the configuration of the weekly run
    observations.csv                       every published vintage
    scenario.json                          names, populations, thresholds, teams, season
    submissions/<model>/<issued>.csv       one forecast file per team and issue date
"""

from __future__ import annotations

import json
from pathlib import Path

from forebrief.demo.config_text import config_toml
from forebrief.demo.csvtext import forecast_csv_texts, observations_csv_text
from forebrief.demo.scenario import DEFAULT_SEED, Scenario, generate_scenario

__all__ = ["regenerate_example_inputs", "scenario_files", "write_scenario"]


def scenario_files(scenario: Scenario) -> dict[str, bytes]:
    """Every file of the scenario as {relative POSIX path: exact bytes}, sorted by path."""
    files: dict[str, bytes] = {
        "forebrief.toml": config_toml(scenario.meta).encode("utf-8"),
        "observations.csv": observations_csv_text(scenario.observations).encode("utf-8"),
        "scenario.json": (json.dumps(scenario.meta, indent=2, ensure_ascii=True) + "\n").encode(
            "utf-8"
        ),
    }
    for (model, issued), text in forecast_csv_texts(scenario.submissions).items():
        files[f"submissions/{model}/{issued}.csv"] = text.encode("utf-8")
    for (model, issued), text in scenario.malformed.items():
        files[f"submissions/{model}/{issued}.csv"] = text.encode("utf-8")
    return dict(sorted(files.items()))


def write_scenario(scenario: Scenario, out_dir: Path) -> list[Path]:
    """Write every file of ``scenario`` under ``out_dir`` (created if needed); return the paths."""
    out_dir = Path(out_dir)
    written: list[Path] = []
    for rel, data in scenario_files(scenario).items():
        path = out_dir / rel
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_bytes(data)
        written.append(path)
    return written


def regenerate_example_inputs(root: Path, *, seed: int = DEFAULT_SEED) -> list[Path]:
    """Regenerate the shipped example folder ``root``; stale submission files are removed."""
    root = Path(root)
    written = write_scenario(generate_scenario(seed=seed), root)
    keep = {p.resolve() for p in written}
    submissions = root / "submissions"
    for path in sorted(submissions.rglob("*.csv")):
        if path.resolve() not in keep:
            path.unlink()
    for folder in sorted(submissions.iterdir()):
        if folder.is_dir() and not any(folder.iterdir()):
            folder.rmdir()
    return written
