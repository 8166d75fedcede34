"""The ``forebrief check`` and ``forebrief score`` command line, on files broken on purpose.

Run through ``forebrief.cli.main([...])`` (stdout and stderr captured) and, for the exit codes
and the absence of tracebacks, through the installed ``forebrief`` console script in a real
subprocess. Outside references: the package version from ``importlib.metadata``; spreadsheet
row numbers checked with the stdlib ``csv`` reader (header = row 1; common practice, no
source); quantiles of the invented forecasts from ``scipy.stats.norm.ppf``. Exit codes 0/1/2
follow the project's contract (2 is also argparse's own code for usage errors).
Teams, regions and numbers are invented; random data use a seeded generator.
"""

from __future__ import annotations

import argparse
import csv
import json
import os
import shutil
import subprocess
from collections.abc import Callable, Sequence
from importlib.metadata import version
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from scipy.stats import norm

from forebrief.cli import build_parser
from forebrief.tables.schema import CM_LEVELS
from forebrief.tables.scoring import BY_ITEM_COLUMNS, BY_MODEL_COLUMNS
from forebrief.tables.validate import EXCLUDED_COLUMNS

HEADER = "model,region,quantity,issued,week_ending,level,value"
OBS_HEADER = "region,quantity,week_ending,value,reported"
MODELS = {"hollowpine": (0.0, 1.0), "quillbeck": (0.15, 0.6), "tansyforge": (-0.1, 1.8)}
REGIONS = ("northvale", "saltmarsh")
ISSUES = pd.date_range("2026-09-07", periods=8, freq="7D")  # Mondays
AS_OF = "2026-11-09"

Run = Callable[[Sequence[str]], tuple[int, str, str]]


def script(*argv: object) -> subprocess.CompletedProcess[str]:
    """The installed console script, in its own process."""
    exe = shutil.which("forebrief")
    assert exe is not None, "the forebrief console script is not installed"
    env = {**os.environ, "NO_COLOR": "1"}
    return subprocess.run(
        [exe, *map(str, argv)], capture_output=True, text=True, env=env, timeout=120, check=False
    )


def fc_lines(
    model: str = "hollowpine",
    region: str = "northvale",
    issued: str = "2026-11-02",
    week_ending: str = "2026-11-07",
    values: Sequence[object] = (10, 20, 30, 40, 50),
    levels: Sequence[object] = CM_LEVELS,
    quantity: str = "admissions",
) -> list[str]:
    return [
        f"{model},{region},{quantity},{issued},{week_ending},{lv},{v}"
        for lv, v in zip(levels, values, strict=True)
    ]


def write(path: Path, lines: Sequence[str], header: str = HEADER) -> Path:
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text("\n".join([header, *lines]) + "\n", encoding="utf-8")
    return path


def csv_rows_with(path: Path, needle: str) -> list[int]:
    with path.open(newline="", encoding="utf-8") as fh:
        return [n for n, row in enumerate(csv.reader(fh), start=1) if needle in row]


# --------------------------------------------------------------------------------------------
# an invented season: three teams, two regions, eight issue dates, horizons 1-2


def season(root: Path) -> tuple[Path, Path]:
    """Write per-team forecast files and an observation file; return (folder, obs file)."""
    rng = np.random.default_rng(7)
    weeks = pd.date_range(ISSUES[0] + pd.Timedelta(days=5), periods=10, freq="7D")
    truth = {
        r: dict(zip(weeks, 80 + 12 * np.arange(10) + rng.normal(0, 6, 10), strict=True))
        for r in REGIONS
    }
    z = norm.ppf(CM_LEVELS)
    for model, (bias, width) in MODELS.items():
        lines = []
        for issued in ISSUES:
            for region in REGIONS:
                for h in (1, 2):
                    week = issued + pd.Timedelta(days=5 + 7 * (h - 1))
                    centre = truth[region][week] * (1 + bias) + rng.normal(0, 4)
                    q = np.maximum(centre + 12 * width * h * z, 0).round(1)
                    lines += fc_lines(
                        model,
                        region,
                        f"{issued:%Y-%m-%d}",
                        f"{week:%Y-%m-%d}",
                        tuple(f"{x:g}" for x in q),
                    )
        write(root / "submissions" / f"{model}.csv", lines)
    obs = [
        f"{r},admissions,{w:%Y-%m-%d},{round(truth[r][w])},{w + pd.Timedelta(days=2):%Y-%m-%d}"
        for r in REGIONS
        for w in weeks
    ]
    return root / "submissions", write(root / "observations.csv", obs, OBS_HEADER)


def break_cell(
    path: Path, *, issued: str, week_ending: str, region: str, level: str, new: str
) -> int:
    """Replace one quantile value in a forecast file; return its spreadsheet row number."""
    lines = path.read_text(encoding="utf-8").splitlines()
    for i, line in enumerate(lines):
        f = line.split(",")
        if f[1:6] == [region, "admissions", issued, week_ending, level]:
            f[6] = new
            lines[i] = ",".join(f)
            path.write_text("\n".join(lines) + "\n", encoding="utf-8")
            return i + 1
    raise AssertionError("no such row")


# --------------------------------------------------------------------------------------------
# version and help


def test_version_is_the_installed_package_version(run: Run) -> None:
    code, out, _ = run(["--version"])
    assert code == 0
    assert out.strip() == f"forebrief {version('forebrief')}"
    proc = script("--version")
    assert (proc.returncode, proc.stdout.strip()) == (0, f"forebrief {version('forebrief')}")


def subcommands() -> list[str]:
    parser = build_parser()
    (sub,) = [a for a in parser._actions if isinstance(a, argparse._SubParsersAction)]
    return list(sub.choices)


def test_check_and_score_are_commands() -> None:
    assert {"check", "score"} <= set(subcommands())


@pytest.mark.parametrize("command", subcommands())
def test_help_works_for_every_subcommand(run: Run, command: str) -> None:
    code, out, err = run([command, "--help"])
    assert code == 0
    assert out.startswith(f"usage: forebrief {command}")
    assert err == ""


def test_top_level_help_lists_the_commands(run: Run) -> None:
    code, out, _ = run(["--help"])
    assert code == 0
    assert "check" in out
    assert "score" in out


# --------------------------------------------------------------------------------------------
# check: exit codes per rule


def good_forecasts() -> list[str]:
    return fc_lines() + fc_lines(model="quillbeck", values=(11, 21, 31, 41, 51))


def good_obs() -> list[str]:
    return ["northvale,admissions,2026-11-07,33,2026-11-09"]


CASES: list[tuple[str, Callable[[list[str]], list[str]], list[str], int, str]] = [
    # (name, change to the forecast lines, extra flags, exit code, text the output must hold)
    ("clean", lambda ls: ls, [], 0, "0 error(s), 0 warning(s)"),
    (
        "not a number",
        lambda ls: [ls[0], ls[1], ls[2].replace(",30", ",twelve"), *ls[3:]],
        [],
        1,
        "'twelve'",
    ),
    ("NaN", lambda ls: [*ls[:2], ls[2].replace(",30", ",NaN"), *ls[3:]], [], 1, "empty or NaN"),
    (
        "empty value",
        lambda ls: [*ls[:2], ls[2].replace(",30", ","), *ls[3:]],
        [],
        1,
        "empty or NaN",
    ),
    ("infinite", lambda ls: [*ls[:4], ls[4].replace(",50", ",inf")], [], 1, "infinite"),
    (
        "level outside (0,1)",
        lambda ls: [*ls[:4], ls[4].replace(",0.95,", ",95,"), *ls[5:]],
        [],
        1,
        "strictly between 0 and 1",
    ),
    (
        "bad issued date",
        lambda ls: [x.replace("2026-11-02", "2026-11-32") for x in ls],
        [],
        1,
        "'2026-11-32'",
    ),
    (
        "target not after issue",
        lambda ls: [x.replace("2026-11-07", "2026-11-02") for x in ls],
        [],
        1,
        "horizon >= 1",
    ),
    ("conflicting duplicate", lambda ls: [*ls, ls[2].replace(",30", ",31")], [], 1, "duplicate"),
    ("identical duplicate", lambda ls: [*ls, ls[2]], [], 0, "warning:"),
    ("crossing", lambda ls: [*ls[:3], ls[3].replace(",40", ",29"), *ls[4:]], [], 1, "crossing"),
    (
        "negative count",
        lambda ls: [ls[0].replace(",10", ",-1"), *ls[1:]],
        [],
        1,
        "cannot be negative",
    ),
    (
        "negative allowed",
        lambda ls: [x.replace("admissions", "growth").replace(",10", ",-1") for x in ls],
        ["--signed", "growth"],
        0,
        "0 error(s)",
    ),
    ("missing median", lambda ls: [*ls[:2], *ls[3:]], [], 0, "not Classical-Model-scored"),
    (
        "missing column",
        lambda ls: [x.rsplit(",", 1)[0] for x in ls],
        [],
        1,
        "required forecast column 'value' is missing",
    ),
    ("unknown column", lambda ls: [x + ",n" for x in ls], [], 0, "'note'"),
]


def _header_for(name: str) -> str:
    return {"missing column": HEADER.rsplit(",", 1)[0], "unknown column": HEADER + ",note"}.get(
        name, HEADER
    )


@pytest.mark.parametrize(
    ("name", "change", "flags", "code", "text"), CASES, ids=[c[0] for c in CASES]
)
def test_check_exit_code_per_rule(
    tmp_path: Path,
    run: Run,
    name: str,
    change: Callable[[list[str]], list[str]],
    flags: list[str],
    code: int,
    text: str,
) -> None:
    path = write(tmp_path / "subs.csv", change(good_forecasts()), _header_for(name))
    got, out, err = run(["check", path, *flags])
    assert got == code, out + err
    assert text in out + err
    assert "Traceback" not in err
    for line in out.splitlines():  # every problem line names the file and offers a fix
        assert line.startswith(("error: ", "warning: "))
        assert str(path) in line
        assert "; fix: " in line


OBS_CASES = [
    ("clean", good_obs(), [], 0, "1 observation rows usable"),
    (
        "conflicting duplicate",
        ["northvale,admissions,2026-11-07,33,", "northvale,admissions,2026-11-07,35,"],
        [],
        1,
        "duplicate",
    ),
    (
        "same vintage twice",
        [*good_obs(), "northvale,admissions,2026-11-07,35,2026-11-09"],
        [],
        1,
        "duplicate",
    ),
    ("equal duplicate", [*good_obs(), *good_obs()], [], 0, "identical copy"),
    (
        "future",
        [*good_obs(), "northvale,admissions,2026-11-14,40,2026-11-16"],
        ["--as-of", "2026-11-10"],
        0,
        "after the as-of date 2026-11-10",
    ),
    (
        "never observed",
        ["saltmarsh,admissions,2026-11-07,33,2026-11-09"],
        [],
        0,
        "region 'northvale'",
    ),
    ("negative", ["northvale,admissions,2026-11-07,-4,2026-11-09"], [], 1, "cannot be negative"),
    ("bad reported", ["northvale,admissions,2026-11-07,4,9 Nov"], [], 1, "'9 Nov'"),
]


@pytest.mark.parametrize(
    ("name", "lines", "flags", "code", "text"), OBS_CASES, ids=[c[0] for c in OBS_CASES]
)
def test_check_observations_exit_code(
    tmp_path: Path, run: Run, name: str, lines: list[str], flags: list[str], code: int, text: str
) -> None:
    fc = write(tmp_path / "subs.csv", good_forecasts())
    obs = write(
        tmp_path / "obs.csv",
        lines,
        OBS_HEADER.removesuffix(",reported") if name == "conflicting duplicate" else OBS_HEADER,
    )
    if name == "conflicting duplicate":  # no reported column: nothing tells the two apart
        obs = write(
            tmp_path / "obs.csv",
            [x.removesuffix(",") for x in lines],
            OBS_HEADER.removesuffix(",reported"),
        )
    got, out, err = run(["check", fc, "--observations", obs, *flags])
    assert got == code, out + err
    assert text in out + err
    assert "Traceback" not in err


def test_the_twelve_line_exactly(tmp_path: Path, run: Run) -> None:
    lines = good_forecasts()
    lines[7] = lines[7].replace(",31", ",twelve")  # quillbeck's median
    path = write(tmp_path / "subs.csv", lines)
    (row,) = csv_rows_with(path, "twelve")
    assert row == 9  # stdlib csv, header = row 1
    code, out, err = run(["check", path])
    assert code == 1
    assert out.splitlines() == [
        f"error: {path} row 9 (model 'quillbeck'): value 'twelve': the quantile value is not "
        "a number; fix: write the quantile value as a plain number such as 12"
    ]
    assert err.strip() == (
        "1 error(s), 0 warning(s); 5 forecast rows usable, 1 forecast(s) quarantined"
    )


def test_check_json(tmp_path: Path, run: Run) -> None:
    lines = [*good_forecasts(), good_forecasts()[0]]  # an identical copy: one warning
    lines[2] = lines[2].replace(",30", ",twelve")
    path = write(tmp_path / "subs.csv", lines)
    code, out, _ = run(["check", path, "--json"])
    assert code == 1
    payload = json.loads(out)
    assert (payload["errors"], payload["warnings"]) == (1, 1)
    err = next(p for p in payload["problems"] if p["severity"] == "error")
    assert (err["file"], err["rows"], err["model"], err["values"]) == (
        str(path),
        [4],
        "hollowpine",
        ["twelve"],
    )
    assert err["line"].endswith("; fix: " + err["fix"])


def test_check_quiet_still_prints_problems(tmp_path: Path, run: Run) -> None:
    lines = good_forecasts()
    lines[2] = lines[2].replace(",30", ",twelve")
    code, out, err = run(["check", write(tmp_path / "subs.csv", lines), "-q"])
    assert code == 1
    assert "'twelve'" in out
    assert err == ""


def test_check_folder_and_glob(tmp_path: Path, run: Run) -> None:
    write(tmp_path / "subs" / "hollowpine" / "2026-11-02.csv", fc_lines())
    write(tmp_path / "subs" / "quillbeck" / "2026-11-02.csv", fc_lines(model="quillbeck"))
    for spec in (tmp_path / "subs", tmp_path / "subs" / "*" / "*.csv"):
        code, _, err = run(["check", spec])
        assert code == 0
        assert "10 forecast rows usable" in err


def test_check_columns_mapping(tmp_path: Path, run: Run) -> None:
    path = write(
        tmp_path / "subs.csv",
        good_forecasts(),
        HEADER.replace("level", "prob").replace("value", "quantile_value"),
    )
    code, out, _ = run(["check", path])
    assert code == 1
    assert "--columns value=quantile_value" in out  # the close name is suggested
    assert "--columns level=YOURNAME" in out  # 'prob' is not close to 'level'
    code, out, err = run(["check", path, "--columns", "level=prob,value=quantile_value"])
    assert (code, out) == (0, "")
    assert "10 forecast rows usable" in err


def test_a_broken_team_file_does_not_stop_the_others(tmp_path: Path, run: Run) -> None:
    write(tmp_path / "subs" / "hollowpine.csv", fc_lines())
    (tmp_path / "subs" / "quillbeck.csv").write_bytes(b"\x89PNG\r\n\x1a\n\x00\x00\xff")
    code, out, err = run(["check", tmp_path / "subs"])
    assert code == 1
    assert f"error: {tmp_path / 'subs' / 'quillbeck.csv'}: cannot be read as a table" in out
    assert "5 forecast rows usable" in err


# --------------------------------------------------------------------------------------------
# usage errors and bad input: clear message, right code, never a traceback


def bad_input(tmp_path: Path, kind: str) -> list[object]:
    good = write(tmp_path / "good.csv", good_forecasts())
    obs = write(tmp_path / "obs.csv", good_obs(), OBS_HEADER)
    score = ["score", "--forecasts", good, "--observations", obs, "--out", tmp_path / "out"]
    if kind == "empty file":
        (tmp_path / "empty.csv").write_bytes(b"")
        return ["check", tmp_path / "empty.csv"]
    if kind == "binary garbage":
        rng = np.random.default_rng(3)
        (tmp_path / "junk.csv").write_bytes(rng.integers(0, 256, 512, dtype=np.uint8).tobytes())
        return ["check", tmp_path / "junk.csv"]
    if kind == "garbage parquet":
        (tmp_path / "junk.parquet").write_bytes(b"PAR1" + bytes(64))
        return ["check", tmp_path / "junk.parquet"]
    if kind == "unknown extension":
        (tmp_path / "subs.xlsx").write_text(HEADER, encoding="utf-8")
        return ["check", tmp_path / "subs.xlsx"]
    if kind == "ragged row":
        write(tmp_path / "ragged.csv", [*good_forecasts(), "a,b,c,d,e,f,g,h,i"])
        return ["check", tmp_path / "ragged.csv"]
    if kind == "folder with no tables":
        (tmp_path / "docs").mkdir()
        (tmp_path / "docs" / "readme.txt").write_text("nothing here", encoding="utf-8")
        return ["check", tmp_path / "docs"]
    if kind == "pattern matching nothing":
        return ["check", tmp_path / "nowhere" / "*.csv"]
    if kind == "missing file":
        return ["check", tmp_path / "missing.csv"]
    if kind == "missing observations":
        return ["check", good, "--observations", tmp_path / "missing_obs.csv"]
    if kind == "unreadable (proc)":
        (tmp_path / "mem.csv").symlink_to("/proc/self/mem")  # reading it fails with EIO
        return ["check", tmp_path / "mem.csv"]
    if kind == "bad date flag":
        return [*score, "--as-of", "30/11/2026"]
    if kind == "impossible date flag":
        return ["check", good, "--as-of", "2026-02-30"]
    if kind == "bad alpha":
        return [*score, "--as-of", AS_OF, "--alpha", "1.5"]
    if kind == "alpha not a number":
        return [*score, "--as-of", AS_OF, "--alpha", "five percent"]
    if kind == "wrong background":
        return [*score, "--as-of", AS_OF, "--background", "logarithmic"]
    if kind == "bad window":
        return [*score, "--as-of", AS_OF, "--window", "0"]
    if kind == "bad columns flag":
        return ["check", good, "--columns", "value"]
    if kind == "out is a file":
        return [*score[:-1], good, "--as-of", AS_OF]
    if kind == "no command":
        return []
    if kind == "unknown command":
        return ["chek", good]
    raise AssertionError(kind)


BAD_INPUTS = [
    # (kind, exit code, text stderr must hold)
    ("empty file", 1, "empty.csv: the file is empty; fix: "),
    ("binary garbage", 1, "junk.csv: cannot be read as a table"),
    ("garbage parquet", 1, "junk.parquet: cannot be read as a table"),
    ("unknown extension", 1, "subs.xlsx: unknown file type; fix: "),
    ("ragged row", 1, "line 12"),
    ("folder with no tables", 1, "this folder holds no .csv or .parquet files; fix: "),
    ("pattern matching nothing", 1, "no CSV or Parquet files match this pattern; fix: "),
    ("missing file", 1, "missing.csv: no such file or folder; fix: "),
    ("missing observations", 1, "missing_obs.csv: no such file or folder; fix: "),
    ("unreadable (proc)", 1, "mem.csv: cannot be read as a table"),
    ("bad date flag", 2, "'30/11/2026' is not a date; write it as YYYY-MM-DD"),
    ("impossible date flag", 2, "'2026-02-30' is not a date"),
    ("bad alpha", 2, "argument --alpha: must lie between 0 and 1; got 1.5"),
    ("alpha not a number", 2, "argument --alpha: 'five percent' is not a number"),
    ("wrong background", 2, "invalid choice: 'logarithmic' (choose from 'uniform', 'log')"),
    ("bad window", 2, "argument --window: must be at least 1; got 0"),
    ("bad columns flag", 2, "--columns entry 'value' is not of the form ours=theirs; fix: "),
    ("out is a file", 1, "good.csv: cannot create the output folder"),
    ("no command", 2, "usage: forebrief"),
    ("unknown command", 2, "invalid choice: 'chek'"),
]


@pytest.mark.parametrize(("kind", "code", "text"), BAD_INPUTS, ids=[b[0] for b in BAD_INPUTS])
def test_bad_input_gets_a_message_not_a_traceback(
    tmp_path: Path, run: Run, kind: str, code: int, text: str
) -> None:
    if kind == "unreadable (proc)" and not Path("/proc/self/mem").exists():
        pytest.skip("needs Linux /proc")
    got, out, err = run(bad_input(tmp_path, kind))
    assert got == code, out + err
    assert text in err
    assert "Traceback" not in out + err


@pytest.mark.parametrize(
    "kind",
    [
        "binary garbage",
        "missing file",
        "bad alpha",
        "wrong background",
        "empty file",
        "folder with no tables",
        "bad date flag",
    ],
)
def test_console_script_exit_codes_without_traceback(tmp_path: Path, kind: str) -> None:
    code, text = next((c, t) for k, c, t in BAD_INPUTS if k == kind)
    proc = script(*bad_input(tmp_path, kind))
    assert proc.returncode == code, proc.stderr
    assert text in proc.stderr
    assert "Traceback" not in proc.stderr


def test_unreadable_by_permissions(tmp_path: Path, run: Run) -> None:
    path = write(tmp_path / "locked.csv", good_forecasts())
    path.chmod(0)
    try:
        if os.access(path, os.R_OK):
            pytest.skip("running with rights that read any file (root)")
        code, _, err = run(["check", path])
        assert code == 1
        assert "locked.csv: cannot be read as a table" in err
        assert "Traceback" not in err
    finally:
        path.chmod(0o600)


def test_console_script_check_real_files(tmp_path: Path) -> None:
    lines = good_forecasts()
    lines[2] = lines[2].replace(",30", ",twelve")
    bad = write(tmp_path / "bad.csv", lines)
    good = write(tmp_path / "good.csv", good_forecasts())
    proc = script("check", good)
    assert (proc.returncode, proc.stdout) == (0, "")
    proc = script("check", bad)
    assert proc.returncode == 1
    assert proc.stdout.startswith(f"error: {bad} row 4 (model 'hollowpine'): value 'twelve': ")
    assert "fix:" in proc.stdout
    assert "Traceback" not in proc.stderr


# --------------------------------------------------------------------------------------------
# score


# The columns documented in forebrief.tables.scoring (BY_MODEL_COLUMNS, BY_ITEM_COLUMNS) and
# forebrief.tables.validate (EXCLUDED_COLUMNS), written out here so that a change on either side shows.
MODEL_COLUMNS = [
    "quantity",
    "horizon",
    "model",
    "n_items",
    "calibration",
    "information",
    "combined",
    "weight",
    "wis",
    "dispersion",
    "overprediction",
    "underprediction",
    "relative_wis",
    "within_50",
    "within_90",
    "abs_error",
    "bias",
    "n_cm_items",
    "passes_cutoff",
    "equal_weights",
]
ITEM_COLUMNS = [
    "model",
    "region",
    "quantity",
    "week_ending",
    "horizon",
    "issued",
    "observed",
    "bin",
    "information",
    "wis",
    "dispersion",
    "overprediction",
    "underprediction",
    "in_50",
    "in_90",
    "abs_error",
    "bias",
    "median",
]
EXCLUDED = [
    "kind",
    "file",
    "rows",
    "model",
    "region",
    "quantity",
    "issued",
    "week_ending",
    "reason",
]
BINS = [f"bin_{j}" for j in range(len(CM_LEVELS) + 1)]


def test_documented_columns_match_the_library() -> None:
    assert list(BY_MODEL_COLUMNS) == MODEL_COLUMNS
    assert list(BY_ITEM_COLUMNS) == ITEM_COLUMNS
    assert list(EXCLUDED_COLUMNS) == EXCLUDED


def test_score_writes_the_four_tables_and_quarantines_only_the_bad(
    tmp_path: Path, run: Run
) -> None:
    subs, obs = season(tmp_path)
    row = break_cell(
        subs / "quillbeck.csv",
        issued="2026-10-05",
        week_ending="2026-10-10",
        region="northvale",
        level="0.5",
        new="twelve",
    )
    assert csv_rows_with(subs / "quillbeck.csv", "twelve") == [row]
    out_dir = tmp_path / "out"
    code, _, err = run(
        [
            "score",
            "--forecasts",
            subs,
            "--observations",
            obs,
            "--as-of",
            AS_OF,
            "--out",
            out_dir,
            "--baseline",
            "hollowpine",
        ]
    )
    assert code == 0, err
    assert "Traceback" not in err
    assert f"{subs / 'quillbeck.csv'} row {row} (model 'quillbeck'): value 'twelve'" in err
    assert f"wrote 4 tables to {out_dir}" in err

    names = sorted(p.name for p in out_dir.iterdir())
    assert names == [
        "excluded.csv",
        "scores_by_item.csv",
        "scores_by_model.csv",
        "scores_by_model_region.csv",
    ]
    by_model = pd.read_csv(out_dir / "scores_by_model.csv")
    by_region = pd.read_csv(out_dir / "scores_by_model_region.csv")
    by_item = pd.read_csv(out_dir / "scores_by_item.csv", dtype={"issued": str, "week_ending": str})
    excluded = pd.read_csv(out_dir / "excluded.csv", dtype=str, keep_default_na=False)
    assert list(by_model.columns) == [*MODEL_COLUMNS, *BINS]
    region_cols = ["quantity", "horizon", "region", "model"]
    assert list(by_region.columns) == [
        *region_cols,
        *[c for c in MODEL_COLUMNS if c not in region_cols],
        *BINS,
    ]
    assert list(by_item.columns) == ITEM_COLUMNS
    assert list(excluded.columns) == EXCLUDED

    # exactly the broken forecast is excluded, with its reason and rows
    assert len(excluded) == 1
    ex = excluded.iloc[0]
    assert (ex["kind"], ex["file"], ex["model"], ex["region"], ex["issued"], ex["week_ending"]) == (
        "forecast",
        str(subs / "quillbeck.csv"),
        "quillbeck",
        "northvale",
        "2026-10-05",
        "2026-10-10",
    )
    assert ex["rows"] == f"{row - 2}-{row + 2}"  # its five rows, the median in the middle
    assert "'twelve'" in ex["reason"]
    # ... and is the only item of the season missing from the scores
    n_weeks_in_window = 8 * 2 * 2  # issue dates x regions x horizons, all observed by AS_OF
    counts = by_item.groupby("model").size().to_dict()
    assert counts == {
        "hollowpine": n_weeks_in_window,
        "quillbeck": n_weeks_in_window - 1,
        "tansyforge": n_weeks_in_window,
    }
    gone = by_item[
        (by_item["model"] == "quillbeck")
        & (by_item["region"] == "northvale")
        & (by_item["issued"] == "2026-10-05")
        & (by_item["week_ending"] == "2026-10-10")
    ]
    assert gone.empty
    assert set(by_model["model"]) == set(MODELS)
    assert by_model.loc[by_model["model"] == "hollowpine", "relative_wis"].tolist() == [1.0, 1.0]
    assert np.isclose(by_model.groupby(["quantity", "horizon"])["weight"].sum(), 1).all()


def test_score_lists_bad_observations_and_unreadable_files_in_excluded(
    tmp_path: Path, run: Run
) -> None:
    subs, obs = season(tmp_path)
    text = obs.read_text(encoding="utf-8").splitlines()
    text.append(text[3].rsplit(",", 2)[0] + ",999," + text[3].rsplit(",", 1)[1])
    obs.write_text("\n".join(text) + "\n", encoding="utf-8")
    (subs / "zz_broken.csv").write_bytes(b"\x00\x01\x02\xff")
    out_dir = tmp_path / "out"
    code, _, err = run(
        ["score", "--forecasts", subs, "--observations", obs, "--as-of", AS_OF, "--out", out_dir]
    )
    assert code == 0, err
    excluded = pd.read_csv(out_dir / "excluded.csv", dtype=str, keep_default_na=False)
    assert sorted(excluded["kind"]) == ["forecast", "observation", "observation"]
    broken = excluded[excluded["kind"] == "forecast"].iloc[0]
    assert (broken["file"], broken["rows"]) == (str(subs / "zz_broken.csv"), "all")
    dup = excluded[excluded["kind"] == "observation"]
    assert sorted(dup["rows"]) == sorted(["4", str(len(text))])
    assert all("duplicate" in r for r in dup["reason"])
    # the week whose observation is in doubt is not scored; the others are
    by_item = pd.read_csv(out_dir / "scores_by_item.csv", dtype={"week_ending": str})
    week = text[3].split(",")[2]
    region = text[3].split(",")[0]
    assert by_item[(by_item["week_ending"] == week) & (by_item["region"] == region)].empty
    assert len(by_item) == 3 * (8 * 2 * 2) - 3 * 2  # three models lose that week at h=1, 2


def test_score_without_anything_to_score_exits_1(tmp_path: Path, run: Run) -> None:
    subs, obs = season(tmp_path)
    code, _, err = run(
        [
            "score",
            "--forecasts",
            subs,
            "--observations",
            obs,
            "--as-of",
            "2026-01-05",
            "--out",
            tmp_path / "out",
        ]
    )
    assert code == 1
    assert "nothing could be scored" in err
    assert (tmp_path / "out" / "excluded.csv").exists()


def test_console_script_score(tmp_path: Path) -> None:
    subs, obs = season(tmp_path)
    proc = script(
        "score",
        "--forecasts",
        subs,
        "--observations",
        obs,
        "--as-of",
        AS_OF,
        "--out",
        tmp_path / "out",
        "-q",
    )
    assert proc.returncode == 0, proc.stderr
    assert "Traceback" not in proc.stderr
    excluded = pd.read_csv(tmp_path / "out" / "excluded.csv")
    assert excluded.empty
    assert list(excluded.columns) == EXCLUDED
