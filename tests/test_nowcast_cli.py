"""The ``forebrief nowcast`` command line.

Run through ``forebrief.cli.main([...])`` (stdout and stderr captured) and once through the
installed console script in a real process. The written file is checked against the library
(:func:`forebrief.tables.nowcast.nowcast_table` on the same validated observations, written with the
project's CSV writer) and read back with the stdlib ``csv`` reader; the hand-worked triangle
of ``tests/test_nowcast.py`` (chain ladder of Mack 1993, sec. 2) gives the nowcasts. Exit codes
0/1/2 follow the project's contract (2 is also argparse's own code for usage errors). Regions
and dates are invented.
"""

from __future__ import annotations

import csv
import os
import shutil
import subprocess
from collections.abc import Callable, Sequence
from pathlib import Path

import pandas as pd
import pytest

from forebrief.app.workflow import load_observations
from forebrief.io.tables import csv_bytes
from forebrief.tables.nowcast import NOWCAST_COLUMNS, nowcast_table

#: Hand-worked triangle (weeks x delays 0..3); the vintage at delay d is published on the
#: Monday d weeks after the week ends. The last week ends on Saturday 2031-03-01.
HAND = [
    [60, 85, 95, 100],
    [66, 92, 104, 108],
    [70, 99, 111, None],
    [75, 104, None, None],
    [54, None, None, None],
]
AS_OF = "2031-03-03"

Run = Callable[[Sequence[object]], tuple[int, str, str]]


@pytest.fixture
def obs_file(tmp_path: Path) -> Path:
    weeks = pd.date_range(end="2031-03-01", periods=len(HAND), freq="7D")
    lines = ["region,quantity,week_ending,value,reported"]
    for week, row in zip(weeks, HAND, strict=True):
        for d, value in enumerate(row):
            if value is not None:
                published = week + pd.Timedelta(days=2 + 7 * d)
                lines.append(f"ostmere,admissions,{week:%Y-%m-%d},{value},{published:%Y-%m-%d}")
    path = tmp_path / "observations.csv"
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


def test_nowcast_writes_the_table(tmp_path: Path, obs_file: Path, run: Run) -> None:
    out = tmp_path / "out" / "nowcast.csv"
    code, _, err = run(["nowcast", "--observations", obs_file, "--as-of", AS_OF, "--out", out])
    assert code == 0, err
    with out.open(newline="", encoding="utf-8") as fh:
        rows = list(csv.DictReader(fh))
    assert tuple(rows[0].keys()) == NOWCAST_COLUMNS
    assert [r["delay"] for r in rows] == ["4", "3", "2", "1", "0"]
    assert [r["complete"] for r in rows] == ["True", "True", "False", "False", "False"]
    # the chain ladder of the hand-worked triangle: 111 x f_2, 104 x f_1 f_2, 54 x f_0 f_1 f_2
    assert [round(float(r["nowcast"]), 4) for r in rows] == [100, 108, 116.0201, 122.0945, 88.8937]
    assert rows[0]["nowcast_low90"] == rows[0]["nowcast_high90"] == ""
    for r in rows[2:]:
        low, mid, high = (float(r[c]) for c in ("nowcast_low90", "nowcast", "nowcast_high90"))
        assert float(r["reported_value"]) <= low < mid < high
    # the very table the library computes, written by the project's CSV writer
    obs = load_observations([obs_file]).table
    expected = nowcast_table(obs, as_of=pd.Timestamp(AS_OF), recent_weeks=12)
    assert out.read_bytes() == csv_bytes(expected)
    assert "wrote 5 rows (1 series, 3 provisional week(s))" in err
    assert "values settle after about 3 week(s)" in err


def test_recent_weeks_flag(tmp_path: Path, obs_file: Path, run: Run) -> None:
    out = tmp_path / "nowcast.csv"
    code, _, err = run(
        [
            "nowcast",
            "--observations",
            obs_file,
            "--as-of",
            AS_OF,
            "--out",
            out,
            "--recent-weeks",
            "2",
            "-q",
        ]
    )
    assert code == 0, err
    table = pd.read_csv(out)
    assert table["delay"].tolist() == [1, 0]
    code, _, err = run(
        [
            "nowcast",
            "--observations",
            obs_file,
            "--as-of",
            AS_OF,
            "--out",
            out,
            "--recent-weeks",
            "0",
        ]
    )
    assert code == 2
    assert "--recent-weeks: must be at least 1; got 0" in err


@pytest.mark.parametrize(
    ("argv", "code", "message"),
    [
        (
            ["--as-of", "2031-13-01"],
            2,
            "argument --as-of: '2031-13-01' is not a date; write it as YYYY-MM-DD",
        ),
        (
            ["--as-of", "2031-01-05"],
            2,
            "forebrief nowcast: error: no observation is known before 2031-01-05; fix: choose a "
            "later --as-of date",
        ),
        (["--missing"], 1, "forebrief nowcast: error: "),
    ],
)
def test_bad_input_gets_one_line(
    tmp_path: Path, obs_file: Path, run: Run, argv: list[str], code: int, message: str
) -> None:
    out = tmp_path / "nowcast.csv"
    source: object = obs_file
    if argv == ["--missing"]:
        source, argv = tmp_path / "nowhere.csv", ["--as-of", AS_OF]
    got, stdout, err = run(["nowcast", "--observations", source, *argv, "--out", out])
    assert got == code
    assert message in err
    if code == 1:
        assert "nowhere.csv" in err
    assert "Traceback" not in stdout + err
    assert not out.exists()


def test_console_script_bad_date(tmp_path: Path, obs_file: Path) -> None:
    exe = shutil.which("forebrief")
    assert exe is not None, "the forebrief console script is not installed"
    proc = subprocess.run(
        [
            exe,
            "nowcast",
            "--observations",
            str(obs_file),
            "--as-of",
            "03/03/2031",
            "--out",
            str(tmp_path / "n.csv"),
        ],
        capture_output=True,
        text=True,
        env={**os.environ, "NO_COLOR": "1"},
        timeout=120,
        check=False,
    )
    assert proc.returncode == 2
    assert "'03/03/2031' is not a date; write it as YYYY-MM-DD" in proc.stderr
    assert "Traceback" not in proc.stderr
