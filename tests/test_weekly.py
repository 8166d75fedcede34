"""The weekly run end to end: the dated record, its manifest, the refusal to overwrite, the
``brief`` and ``demo`` commands, and that no observation on or after the issue date is used.

Outside references: SHA-256 as in FIPS 180-4, recomputed with :mod:`hashlib`; the record layout
and the command-line contract are those of the README ("What a weekly record holds",
"Commands"). One demo run (through the installed console script) is shared by the module.
"""

from __future__ import annotations

import gzip
import hashlib
import json
import os
import shutil
import subprocess
from pathlib import Path

import pandas as pd
import pytest

from forebrief import __version__
from forebrief.app.config import load_config
from forebrief.app.weekly import run_briefing
from forebrief.app.workflow import load_inputs
from forebrief.cli import build_parser, main
from forebrief.demo import generate_scenario, write_scenario
from forebrief.io.outputs import csv_bytes, json_bytes

# WeasyPrint 70 opens its sRGB profile (weasyprint/pdf/__init__.py, the 'srgb' output intent)
# and never closes it; the record's PDF is rendered by the in-process runs below.
WEASYPRINT_ICC_LEAK = (
    r"ignore:Exception ignored in. <_io\.FileIO name='[^']*sRGB2014\.icc'"
    ":pytest.PytestUnraisableExceptionWarning"
)

REQUIRED = (
    "facts.json",
    "briefing.txt",
    "scores_by_model.csv",
    "scores_by_model_region.csv",
    "ensemble.csv",
    "weights.csv",
    "backtest_scores.csv",
    "excluded.csv",
    "manifest.json",
)


def script(*argv: object, cwd: Path | None = None) -> subprocess.CompletedProcess[str]:
    """The installed console script, in its own process."""
    exe = shutil.which("forebrief")
    assert exe is not None, "the forebrief console script is not installed"
    env = {**os.environ, "NO_COLOR": "1"}
    return subprocess.run(
        [exe, *map(str, argv)],
        capture_output=True,
        text=True,
        env=env,
        timeout=300,
        check=False,
        cwd=cwd,
    )


def sha256(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def snapshot(folder: Path) -> dict[str, tuple[bytes, int]]:
    return {
        p.relative_to(folder).as_posix(): (p.read_bytes(), p.stat().st_mtime_ns)
        for p in sorted(folder.rglob("*"))
        if p.is_file()
    }


@pytest.fixture(scope="module")
def demo(tmp_path_factory: pytest.TempPathFactory) -> tuple[Path, subprocess.CompletedProcess[str]]:
    out = tmp_path_factory.mktemp("weekly") / "demo"
    return out, script("demo", "--out", out)


@pytest.fixture(scope="module")
def record(demo: tuple[Path, subprocess.CompletedProcess[str]]) -> Path:
    out, done = demo
    assert done.returncode == 0, done.stderr
    # the latest issue date among the submissions (forebrief's own reader, as brief uses)
    forecasts = load_inputs(out / "submissions", out / "observations.csv").forecasts.table
    latest = f"{forecasts['issued'].max():%Y-%m-%d}"
    return out / "archive" / latest


# --------------------------------------------------------------------------------------------
# the demo


@pytest.mark.slow
def test_demo_prints_the_record_s_path(
    demo: tuple[Path, subprocess.CompletedProcess[str]], record: Path
) -> None:
    out, done = demo
    assert done.returncode == 0
    assert done.stdout.strip() == str(record)  # data to stdout: the record's path only
    assert "Traceback" not in done.stderr
    assert record.parent == out / "archive"
    assert (out / "forebrief.toml").is_file()


@pytest.mark.slow
def test_the_record_holds_every_required_file(record: Path) -> None:
    for name in REQUIRED:
        assert (record / name).is_file(), name
        assert (record / name).stat().st_size > 0, name
    assert not [p for p in record.parent.iterdir() if p.name.endswith(".partial")]


@pytest.mark.slow
def test_the_manifest_s_checksums_match_the_files(record: Path) -> None:
    manifest = json.loads((record / "manifest.json").read_text(encoding="utf-8"))
    on_disk = {p.relative_to(record).as_posix() for p in record.rglob("*") if p.is_file()}
    covered = {"manifest.json"}
    for o in manifest["outputs"]:
        path = record / o["path"]
        assert o["sha256"] == sha256(path), o["path"]
        assert o["bytes"] == path.stat().st_size
        covered.add(o["path"])
    assert set(REQUIRED) - {"manifest.json"} <= covered
    demo_dir = record.parent.parent
    expected = {demo_dir / "observations.csv", *(demo_dir / "submissions").rglob("*.csv")}
    assert {Path(i["path"]) for i in manifest["inputs"]} == expected
    for i in manifest["inputs"]:
        original = Path(i["path"]).read_bytes()
        assert i["sha256"] == hashlib.sha256(original).hexdigest(), i["path"]
        assert i["bytes"] == len(original)
        if "stored" in i:  # a compressed copy (checked in the next test)
            covered.add(i["stored"])
    # files that embed the manifest (so cannot be in it) are listed in the checksum file
    rest = on_disk - covered
    if rest:
        sums = dict(
            reversed(line.split("  ", 1))
            for line in (record / "SHA256SUMS").read_text(encoding="utf-8").splitlines()
        )
        for name in rest - {"SHA256SUMS"}:
            assert sums.get(name) == sha256(record / name), name
    assert manifest["tool_version"] == __version__
    assert manifest["issued"] == record.name
    cfg = load_config(demo_dir / "forebrief.toml")
    assert manifest["config"]["title"] == cfg.title
    assert manifest["config"]["total_region"] == cfg.total_region
    assert manifest["config"]["archive"] == str(demo_dir / "archive")


@pytest.mark.slow
def test_every_archived_input_copy_is_that_input(record: Path) -> None:
    manifest = json.loads((record / "manifest.json").read_text(encoding="utf-8"))
    stored = [i for i in manifest["inputs"] if "stored" in i]
    assert stored
    # one copy per input: teams' files often share a name (<issued>.csv)
    assert len({i["stored"] for i in stored}) == len(stored)
    for i in stored:
        assert i["stored_sha256"] == sha256(record / i["stored"]), i["stored"]
        copy = gzip.decompress((record / i["stored"]).read_bytes())
        assert hashlib.sha256(copy).hexdigest() == i["sha256"], i["path"]


@pytest.mark.slow
def test_the_facts_are_for_the_latest_issue_date(record: Path) -> None:
    facts = json.loads((record / "facts.json").read_text(encoding="utf-8"))
    assert facts["issued"] == record.name
    assert facts["data_as_of"] < facts["issued"]
    text = (record / "briefing.txt").read_text(encoding="utf-8")
    assert facts["issued_text"] in text


@pytest.mark.slow
def test_a_second_run_refuses_and_changes_nothing(record: Path) -> None:
    demo_dir = record.parent.parent
    archive_before = sorted(p.name for p in record.parent.iterdir())
    before = snapshot(record)
    done = script("brief", "--config", demo_dir / "forebrief.toml")
    assert done.returncode == 1
    assert str(record) in done.stderr
    assert "already exists" in done.stderr
    assert "Traceback" not in done.stderr
    assert done.stdout == ""
    assert snapshot(record) == before  # bytes and modification times
    assert sorted(p.name for p in record.parent.iterdir()) == archive_before


def test_the_demo_folder_defaults_to_forebrief_demo() -> None:
    args = build_parser().parse_args(["demo"])
    assert args.out == Path("forebrief-demo")


# --------------------------------------------------------------------------------------------
# brief without a configuration


def test_brief_without_config_or_inputs_says_what_to_pass(
    capsys: pytest.CaptureFixture[str],
) -> None:
    assert main(["brief"]) == 2
    err = capsys.readouterr().err
    assert "--config" in err
    assert "--forecasts" in err
    assert "--observations" in err
    assert "Traceback" not in err


@pytest.mark.slow
@pytest.mark.filterwarnings(WEASYPRINT_ICC_LEAK)
def test_brief_with_flags_alone_runs_on_defaults(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    write_scenario(generate_scenario(), tmp_path / "in")
    for path in (tmp_path / "in" / "submissions").rglob("*.csv"):
        if path.stem > "2026-08-17":  # a short history keeps the run quick
            path.unlink()
    archive = tmp_path / "records"
    code = main(
        [
            "brief",
            "--forecasts",
            str(tmp_path / "in" / "submissions"),
            "--observations",
            str(tmp_path / "in" / "observations.csv"),
            "--archive",
            str(archive),
            "-q",
        ]
    )
    captured = capsys.readouterr()
    assert code == 0, captured.err
    record = archive / "2026-08-17"  # the latest issue date in the forecasts
    assert captured.out.strip() == str(record)
    facts = json.loads((record / "facts.json").read_text(encoding="utf-8"))
    assert (facts["title"], facts["jurisdiction"], facts["total_region"]) == (
        "Weekly forecast briefing",
        "the jurisdiction",
        None,
    )
    assert facts["total_available"] is False
    manifest = json.loads((record / "manifest.json").read_text(encoding="utf-8"))
    assert manifest["config"]["source"] is None
    assert manifest["config"]["window"] == 12
    assert manifest["config"]["alpha"] == "auto"


# --------------------------------------------------------------------------------------------
# no observation on or after the issue date is used

ISSUED = pd.Timestamp("2026-11-09")  # three weeks before the demo's last issue date
COMPARED = (
    "facts.json",
    "ensemble.csv",
    "weights.csv",
    "scores_by_model.csv",
    "backtest_scores.csv",
    "scores_by_model_region.csv",
    "scores_by_item.csv",
    "robustness.csv",
    "weights_history.csv",
    "briefing.txt",
)


def _future_tripled(observations: pd.DataFrame, issued: pd.Timestamp) -> pd.DataFrame:
    """Every value not yet known on ``issued`` times 3, and fake vintages published after it."""
    o = observations.copy()
    week = pd.to_datetime(o["week_ending"])
    reported = pd.to_datetime(o["reported"])
    future = (week >= issued) | (reported > issued)
    assert future.any()
    assert (~future).any()
    o.loc[future, "value"] = o.loc[future, "value"] * 3
    # a revision of every week known on the issue date, published the day after it
    known = (
        o.loc[~future]
        .sort_values("reported")
        .groupby(["region", "quantity", "week_ending"], as_index=False)
        .tail(1)
    )
    revised = known.assign(
        value=known["value"] * 3 + 1, reported=f"{issued + pd.Timedelta(days=1):%Y-%m-%d}"
    )
    return pd.concat([o, revised], ignore_index=True)


def _record_tables(folder: Path, forecasts: Path) -> dict[str, bytes]:
    cfg = load_config(folder / "forebrief.toml").with_overrides(forecasts=(forecasts,))
    inputs = load_inputs(
        cfg.forecasts, cfg.observations, columns=cfg.columns, signed=cfg.signed, as_of=ISSUED
    )
    run = run_briefing(cfg, inputs, issued=ISSUED)
    assert run.issued == ISSUED
    assert run.facts.data_as_of < f"{ISSUED:%Y-%m-%d}"
    # the bytes the record's writer stores (forebrief.io.outputs), without the rendering
    files = {name: csv_bytes(frame) for name, frame in run.tables().items()}
    files["facts.json"] = json_bytes(run.facts.to_dict())
    files["briefing.txt"] = run.text.encode("utf-8")
    return files


@pytest.mark.slow
def test_no_observation_on_or_after_the_issue_date_is_used(
    demo: tuple[Path, subprocess.CompletedProcess[str]], tmp_path: Path
) -> None:
    demo_dir, _ = demo
    shipped = pd.read_csv(demo_dir / "observations.csv", dtype=str)
    altered = _future_tripled(shipped.astype({"value": float}), ISSUED)
    records = {}
    for name, table in (("shipped", None), ("altered", altered)):
        folder = tmp_path / name
        (folder / "data").mkdir(parents=True)
        toml = (demo_dir / "forebrief.toml").read_text(encoding="utf-8")
        (folder / "forebrief.toml").write_text(
            toml.replace(
                'observations = "observations.csv"', 'observations = "data/observations.csv"'
            ),
            encoding="utf-8",
        )
        target = folder / "data" / "observations.csv"
        if table is None:
            shutil.copyfile(demo_dir / "observations.csv", target)
        else:
            table.to_csv(target, index=False)
        records[name] = _record_tables(folder, demo_dir / "submissions")
    # the altered inputs really differ: tripled future values and later vintages
    a = pd.read_csv(tmp_path / "altered" / "data" / "observations.csv")
    assert len(a) > len(shipped)
    assert a["value"].sum() > 2 * shipped["value"].astype(float).sum()
    for name in COMPARED:
        assert records["shipped"][name], name
        assert records["shipped"][name] == records["altered"][name], (
            f"{name} depends on data not known on {ISSUED:%Y-%m-%d}"
        )
