"""Input validation on small files broken on purpose (library level).

What the checks are held against, from outside the project:
- row numbers: Python's stdlib ``csv`` reader, counting the header as row 1 the way a
  spreadsheet numbers rows (the contract; common practice, no source);
- dates: ISO 8601 calendar dates YYYY-MM-DD, parsed independently with
  ``datetime.date.fromisoformat``;
- horizon: ceil(days / 7) from the contract, computed with ``datetime`` and ``math.ceil``;
- Parquet: files written by pyarrow directly (not through forebrief).
Teams, regions and dates are invented.
"""

from __future__ import annotations

import csv
import datetime as dt
import math
from pathlib import Path

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.parquet as pq
import pytest

from forebrief.app.workflow import load_forecasts, load_observations
from forebrief.errors import ConfigError, InputError
from forebrief.io.tables import parse_column_map, read_raw_table, resolve_inputs
from forebrief.tables.observations import observations_as_of, revisions_between
from forebrief.tables.schema import CM_LEVELS, STANDARD_LEVELS
from forebrief.tables.validate import (
    EXCLUDED_COLUMNS,
    Problem,
    ValidatedForecasts,
    ValidatedObservations,
    cross_check,
    format_rows,
    validate_forecasts,
    validate_observations,
)

HEADER = "model,region,quantity,issued,week_ending,level,value"
OBS_HEADER = "region,quantity,week_ending,value"
VALUES = (10, 20, 30, 40, 50)  # increasing, one per Classical Model level
KEY = ("model", "region", "quantity", "issued", "week_ending")


def fc_lines(
    model: str = "hollowpine",
    region: str = "northvale",
    quantity: str = "admissions",
    issued: str = "2026-11-02",
    week_ending: str = "2026-11-07",
    levels: tuple[object, ...] = CM_LEVELS,
    values: tuple[object, ...] = VALUES,
) -> list[str]:
    """The CSV lines (no header) of one forecast."""
    return [
        f"{model},{region},{quantity},{issued},{week_ending},{lv},{v}"
        for lv, v in zip(levels, values, strict=True)
    ]


def good_block() -> list[str]:
    """Three good forecasts: two models, two items."""
    return (
        fc_lines()
        + fc_lines(week_ending="2026-11-14", values=(12, 22, 32, 42, 52))
        + fc_lines(model="quillbeck", values=(11, 21, 31, 41, 51))
    )


def write(path: Path, lines: list[str], header: str = HEADER) -> Path:
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text("\n".join([header, *lines]) + "\n", encoding="utf-8")
    return path


def validate_csv(path: Path, **kwargs: object) -> ValidatedForecasts:
    return validate_forecasts([read_raw_table(path)], **kwargs)  # type: ignore[arg-type]


def errors(problems: tuple[Problem, ...] | list[Problem]) -> list[Problem]:
    return [p for p in problems if p.severity == "error"]


def warnings_(problems: tuple[Problem, ...] | list[Problem]) -> list[Problem]:
    return [p for p in problems if p.severity == "warning"]


def csv_row_of(path: Path, needle: str) -> list[int]:
    """Spreadsheet row numbers (header = 1) of the lines holding ``needle``, by stdlib csv."""
    with path.open(newline="", encoding="utf-8") as fh:
        return [n for n, row in enumerate(csv.reader(fh), start=1) if needle in row]


def forecast_sizes(table: pd.DataFrame) -> dict[tuple[object, ...], int]:
    keyed = table.assign(
        issued=table["issued"].dt.strftime("%Y-%m-%d"),
        week_ending=table["week_ending"].dt.strftime("%Y-%m-%d"),
    )
    return {k: len(g) for k, g in keyed.groupby(list(KEY))}


# --------------------------------------------------------------------------------------------
# a clean file


def test_clean_file_passes_with_every_row_and_horizon(tmp_path: Path) -> None:
    lines = good_block() + fc_lines(issued="2026-11-02", week_ending="2026-11-28")
    v = validate_csv(write(tmp_path / "hollowpine.csv", lines))
    assert v.problems == ()
    assert v.excluded.empty
    assert list(v.excluded.columns) == list(EXCLUDED_COLUMNS)
    assert len(v.table) == len(lines)
    # horizon = ceil(days / 7) (the contract), computed independently with datetime
    for (issued, week_ending), part in v.table.groupby(["issued", "week_ending"]):
        days = (week_ending.date() - issued.date()).days
        assert set(part["horizon"]) == {math.ceil(days / 7)}
    assert sorted(set(v.table["horizon"])) == [1, 2, 4]
    npt_levels = np.unique(v.table["level"].to_numpy())
    assert npt_levels.tolist() == list(CM_LEVELS)  # exact, no rounding residue
    assert v.table["issued"].dt.date.min() == dt.date.fromisoformat("2026-11-02")


def test_standard_23_levels_raise_no_level_warning(tmp_path: Path) -> None:
    values = tuple(range(1, len(STANDARD_LEVELS) + 1))
    v = validate_csv(write(tmp_path / "f.csv", fc_lines(levels=STANDARD_LEVELS, values=values)))
    assert v.problems == ()
    assert len(v.table) == 23


# --------------------------------------------------------------------------------------------
# columns


def test_missing_column_excludes_that_file_only(tmp_path: Path) -> None:
    broken = write(
        tmp_path / "a.csv",
        [line.rsplit(",", 1)[0] for line in fc_lines()],
        header=HEADER.rsplit(",", 1)[0],
    )
    good = write(tmp_path / "b.csv", fc_lines(model="quillbeck"))
    v = validate_forecasts([read_raw_table(broken), read_raw_table(good)])
    (err,) = errors(v.problems)
    assert err.check == "missing-column"
    assert err.file == str(broken)
    assert err.values == ("value",)
    assert "add a column 'value'" in err.fix
    assert v.excluded["rows"].tolist() == ["all"]
    assert v.excluded["file"].tolist() == [str(broken)]
    assert "value" in v.excluded["reason"].iloc[0]
    assert set(v.table["model"]) == {"quillbeck"}
    assert len(v.table) == 5


def test_missing_column_suggests_the_close_name(tmp_path: Path) -> None:
    path = write(tmp_path / "a.csv", fc_lines(), header=HEADER.replace("level", "levels"))
    v = validate_csv(path)
    (err,) = errors(v.problems)
    assert err.values == ("level",)
    assert "--columns level=levels" in err.fix
    (warn,) = warnings_(v.problems)
    assert warn.check == "unknown-column"
    assert warn.values == ("levels",)
    assert v.table.empty


def test_unknown_column_is_a_warning_and_keeps_the_data(tmp_path: Path) -> None:
    lines = [line + ",note" for line in fc_lines()]
    v = validate_csv(write(tmp_path / "a.csv", lines, header=HEADER + ",comment"))
    assert errors(v.problems) == []
    (warn,) = warnings_(v.problems)
    assert (warn.check, warn.values) == ("unknown-column", ("comment",))
    assert len(v.table) == 5


def test_every_file_lacking_columns_does_not_crash(tmp_path: Path) -> None:
    path = write(tmp_path / "a.csv", ["x,y"], header="foo,bar")
    v = validate_csv(path)
    assert {p.check for p in errors(v.problems)} == {"missing-column"}
    assert len(errors(v.problems)) == 7
    assert v.table.empty
    assert v.excluded["rows"].tolist() == ["all"]


def test_header_only_file_is_a_warning_not_a_crash(tmp_path: Path) -> None:
    v = validate_csv(write(tmp_path / "a.csv", []))
    assert errors(v.problems) == []
    (warn,) = v.problems
    assert warn.check == "no-rows"
    assert v.table.empty
    o = validate_observations([read_raw_table(write(tmp_path / "o.csv", [], OBS_HEADER))])
    assert [p.check for p in o.problems] == ["no-rows"]
    assert o.table.empty


# --------------------------------------------------------------------------------------------
# one bad cell: error, one problem line, and only its forecast is quarantined

BAD_CELLS = [
    # (column, bad text, check, words the message must contain)
    ("value", "twelve", "not-a-number", "not a number"),
    ("value", "", "missing-number", "empty or NaN"),
    ("value", "NaN", "missing-number", "empty or NaN"),
    ("value", "inf", "infinite", "infinite"),
    ("value", "-inf", "infinite", "infinite"),
    ("value", "-1", "negative", "cannot be negative"),
    ("level", "half", "not-a-number", "not a number"),
    ("level", "1.5", "level-range", "strictly between 0 and 1"),
    ("level", "0", "level-range", "strictly between 0 and 1"),
    ("level", "1", "level-range", "strictly between 0 and 1"),
    ("level", "50", "level-range", "strictly between 0 and 1"),
    ("level", "", "missing-number", "empty or NaN"),
]


@pytest.mark.parametrize(("column", "bad", "check", "words"), BAD_CELLS)
def test_bad_number_quarantines_only_its_forecast(
    tmp_path: Path, column: str, bad: str, check: str, words: str
) -> None:
    bad_fc = fc_lines(model="tansyforge")
    fields = bad_fc[2].split(",")  # the median row
    fields[HEADER.split(",").index(column)] = bad
    bad_fc[2] = ",".join(fields)
    path = write(tmp_path / "subs.csv", [*good_block()[:5], *bad_fc, *good_block()[5:]])
    v = validate_csv(path)

    mine = [p for p in errors(v.problems) if p.check == check]
    assert len(mine) == 1, [p.line() for p in v.problems]
    p = mine[0]
    assert p.file == str(path)
    assert p.rows == (9,)  # header 1, five good rows 2-6, bad forecast 7-11, median row 9
    assert p.model == "tansyforge"
    assert p.column == column
    assert words in p.message
    line = p.line()
    assert line.startswith(f"error: {path} row 9 (model 'tansyforge'): {column} ")
    assert "; fix: " in line
    if bad.strip():
        assert repr(bad) in line  # the bad text is shown as written

    # the quarantined forecast: one excluded row, all five rows, a reason naming the value
    assert len(v.excluded) == 1
    ex = v.excluded.iloc[0]
    assert (ex["model"], ex["rows"], ex["kind"]) == ("tansyforge", "7-11", "forecast")
    assert (ex["region"], ex["week_ending"]) == ("northvale", "2026-11-07")
    assert words in ex["reason"]
    # everything else survives whole
    assert "tansyforge" not in set(v.table["model"])
    assert sorted(forecast_sizes(v.table).values()) == [5, 5, 5]


@pytest.mark.parametrize(
    ("column", "bad", "check"),
    [
        ("issued", "2026-13-02", "bad-date"),
        ("issued", "02/11/2026", "bad-date"),
        ("week_ending", "2026-11-31", "bad-date"),
        ("week_ending", "next week", "bad-date"),
        ("week_ending", "", "empty"),
        ("model", "", "empty"),
        ("region", "", "empty"),
        ("week_ending", "2026-11-02", "target-not-after-issue"),  # same day as issued
        ("week_ending", "2026-10-31", "target-not-after-issue"),  # before issued
    ],
)
def test_bad_key_field_quarantines_the_forecast(
    tmp_path: Path, column: str, bad: str, check: str
) -> None:
    kwargs = {"model": "tansyforge", column: bad}
    path = write(tmp_path / "subs.csv", [*good_block(), *fc_lines(**kwargs)])
    v = validate_csv(path)
    mine = [p for p in errors(v.problems) if p.check == check]
    assert len(mine) == 1, [p.line() for p in v.problems]
    assert mine[0].rows == (17, 18, 19, 20, 21)
    assert mine[0].fix
    if bad:
        assert any(bad in shown for shown in mine[0].values)
        # ISO dates are what the independent parser accepts; the bad ones are not
        if check == "bad-date":
            with pytest.raises(ValueError, match=r"isoformat|must be in|out of range"):
                dt.date.fromisoformat(bad)
    assert len(v.excluded) == 1
    assert v.excluded["rows"].iloc[0] == "17-21"
    assert sorted(forecast_sizes(v.table).values()) == [5, 5, 5]


def test_one_mistyped_date_row_is_quarantined_alone_and_the_rest_warned(tmp_path: Path) -> None:
    lines = fc_lines()
    lines[2] = lines[2].replace("2026-11-07", "2026-11-77")
    v = validate_csv(write(tmp_path / "a.csv", lines))
    (err,) = errors(v.problems)
    assert (err.check, err.rows, err.values) == ("bad-date", (4,), ("2026-11-77",))
    # the four other rows are kept, and the missing median is not silent
    assert len(v.table) == 4
    (warn,) = warnings_(v.problems)
    assert warn.check == "missing-levels"
    assert warn.values == ("0.5",)
    assert v.excluded["rows"].tolist() == ["4"]


def test_several_errors_in_one_forecast_give_one_excluded_row_with_every_reason(
    tmp_path: Path,
) -> None:
    lines = fc_lines(values=("-5", 20, "twelve", 40, 50))
    v = validate_csv(write(tmp_path / "a.csv", lines))
    assert {p.check for p in errors(v.problems)} == {"not-a-number", "negative"}
    (reason,) = v.excluded["reason"].tolist()
    assert "'twelve'" in reason
    assert "negative" in reason
    assert v.excluded["rows"].tolist() == ["2-6"]


# --------------------------------------------------------------------------------------------
# duplicates, crossing, negatives, levels


def test_conflicting_duplicate_is_an_error_naming_both_rows(tmp_path: Path) -> None:
    lines = [*fc_lines(), fc_lines(values=(10, 20, 33, 40, 50))[2], *fc_lines(model="quillbeck")]
    v = validate_csv(write(tmp_path / "a.csv", lines))
    (err,) = errors(v.problems)
    assert err.check == "duplicate"
    assert err.message.startswith("duplicate")
    assert err.rows == (4, 7)
    assert err.values == ("level 0.5, value 30", "level 0.5, value 33")
    assert v.excluded["rows"].tolist() == ["2-7"]
    assert set(v.table["model"]) == {"quillbeck"}


def test_identical_duplicate_is_a_warning_and_the_copy_is_dropped(tmp_path: Path) -> None:
    # "0.50" and "0.5" are the same level; the values are equal, so nothing conflicts
    lines = [*fc_lines(), "hollowpine,northvale,admissions,2026-11-02,2026-11-07,0.50,30"]
    v = validate_csv(write(tmp_path / "a.csv", lines))
    assert errors(v.problems) == []
    (warn,) = v.problems
    assert (warn.check, warn.rows) == ("duplicate", (7,))
    assert "duplicate" in warn.line()
    assert v.excluded.empty
    assert len(v.table) == 5


def test_same_level_for_another_item_is_not_a_duplicate(tmp_path: Path) -> None:
    lines = fc_lines() + fc_lines(region="saltmarsh") + fc_lines(issued="2026-10-26")
    v = validate_csv(write(tmp_path / "a.csv", lines))
    assert not [p for p in v.problems if p.check == "duplicate"]
    assert len(v.table) == 15


def test_crossing_quantiles_are_an_error(tmp_path: Path) -> None:
    lines = [*fc_lines(values=(10, 20, 30, 25, 50)), *fc_lines(model="quillbeck")]
    v = validate_csv(write(tmp_path / "a.csv", lines))
    (err,) = errors(v.problems)
    assert err.check == "crossing"
    assert err.rows == (4, 5)  # the median row and the 0.75 row below it
    assert err.values == ("25 at level 0.75 below 30 at level 0.5",)
    assert v.excluded["rows"].tolist() == ["2-6"]
    assert set(v.table["model"]) == {"quillbeck"}


def test_crossing_is_judged_by_level_not_by_row_order(tmp_path: Path) -> None:
    shuffled = [fc_lines()[i] for i in (4, 0, 3, 1, 2)]
    v = validate_csv(write(tmp_path / "a.csv", shuffled))
    assert v.problems == ()
    flat = fc_lines(values=(10, 20, 20, 20, 50))  # equal neighbours do not cross
    assert validate_csv(write(tmp_path / "b.csv", flat)).problems == ()


def test_negative_values_need_a_signed_quantity(tmp_path: Path) -> None:
    signed = fc_lines(quantity="growth_rate", values=(-0.3, -0.1, 0, 0.1, 0.2))
    counts = fc_lines(model="quillbeck", values=(-2, 0, 1, 2, 3))
    path = write(tmp_path / "a.csv", [*signed, *counts])

    v = validate_csv(path)
    assert {(p.check, p.rows) for p in errors(v.problems)} == {
        ("negative", (2, 3)),  # growth_rate is a count unless configured
        ("negative", (7,)),
    }
    v = validate_csv(path, signed=("growth_rate",))
    (err,) = errors(v.problems)
    assert (err.check, err.rows, err.values) == ("negative", (7,), ("-2",))
    assert set(v.table["quantity"]) == {"growth_rate"}
    assert v.table["value"].min() == pytest.approx(-0.3)


def test_missing_median_or_cm_level_is_a_warning_and_the_forecast_kept(tmp_path: Path) -> None:
    no_median = fc_lines(levels=(0.05, 0.25, 0.75, 0.95), values=(1, 2, 3, 4))
    no_tails = fc_lines(model="quillbeck", levels=(0.25, 0.5, 0.75), values=(1, 2, 3))
    v = validate_csv(write(tmp_path / "a.csv", [*no_median, *no_tails]))
    assert errors(v.problems) == []
    by_model = {p.model: p for p in v.problems}
    assert set(by_model) == {"hollowpine", "quillbeck"}
    assert all(p.check == "missing-levels" for p in by_model.values())
    assert by_model["hollowpine"].values == ("0.5",)
    assert by_model["quillbeck"].values == ("0.05", "0.95")
    assert "not Classical-Model-scored" in by_model["quillbeck"].message
    assert len(v.table) == 7
    assert v.excluded.empty


def test_custom_cm_levels_are_the_ones_required(tmp_path: Path) -> None:
    lines = fc_lines(levels=(0.1, 0.5, 0.9), values=(1, 2, 3))
    assert validate_csv(write(tmp_path / "a.csv", lines), cm_levels=(0.1, 0.5, 0.9)).problems == ()


# --------------------------------------------------------------------------------------------
# the rest of the file survives


def test_one_bad_row_in_a_large_file_costs_exactly_its_forecast(tmp_path: Path) -> None:
    rng = np.random.default_rng(20261102)
    lines = []
    for model in ("hollowpine", "quillbeck", "tansyforge"):
        for region in ("northvale", "saltmarsh", "brackenfold"):
            for week in ("2026-11-07", "2026-11-14", "2026-11-21"):
                base = float(rng.uniform(50, 200))
                vals = tuple(f"{base + 10 * k:.1f}" for k in range(5))
                lines += fc_lines(model=model, region=region, week_ending=week, values=vals)
    victim = 5 * 13 + 3  # one row inside the 14th forecast
    lines[victim] = lines[victim].rsplit(",", 1)[0] + ",twelve"
    path = write(tmp_path / "a.csv", lines)
    v = validate_csv(path)

    (err,) = errors(v.problems)
    assert err.rows == (victim + 2,)
    assert csv_row_of(path, "twelve") == [victim + 2]  # the stdlib reader agrees
    sizes = forecast_sizes(v.table)
    assert len(sizes) == 26
    assert set(sizes.values()) == {5}
    assert len(v.table) + 5 == len(lines)
    assert v.excluded["rows"].tolist() == [format_rows(range(5 * 13 + 2, 5 * 14 + 2))]
    bad = v.excluded.iloc[0]
    assert (bad["model"], bad["region"], bad["week_ending"]) == (
        "quillbeck",
        "saltmarsh",
        "2026-11-14",
    )


# --------------------------------------------------------------------------------------------
# row numbers, file types, folders, column mapping


def test_csv_row_numbers_count_the_header_as_row_one(tmp_path: Path) -> None:
    lines = [*fc_lines(), *fc_lines(model="quillbeck", values=(1, 2, "twelve", 4, 5))]
    path = write(tmp_path / "a.csv", lines)
    (err,) = errors(validate_csv(path).problems)
    assert err.rows == tuple(csv_row_of(path, "twelve")) == (9,)


def parquet_table(tmp_path: Path, *, typed_dates: bool) -> Path:
    rows = [line.split(",") for line in fc_lines() + fc_lines(model="quillbeck")]
    cols = list(zip(*rows, strict=True))
    issued: pa.Array = pa.array(cols[3])
    week: pa.Array = pa.array(cols[4])
    if typed_dates:  # real date and timestamp columns, as many Parquet writers produce
        issued = pa.array([dt.date.fromisoformat(d) for d in cols[3]], type=pa.date32())
        week = pa.array([dt.datetime.fromisoformat(d) for d in cols[4]], type=pa.timestamp("us"))
    values = [float(x) for x in cols[6]]
    values[7] = float("nan")  # quillbeck's median, the 8th data row
    table = pa.table(
        {
            "model": cols[0],
            "region": cols[1],
            "quantity": cols[2],
            "issued": issued,
            "week_ending": week,
            "level": [float(x) for x in cols[5]],
            "value": values,
        }
    )
    path = tmp_path / "subs.parquet"
    pq.write_table(table, path)
    return path


@pytest.mark.parametrize("typed_dates", [False, True])
def test_parquet_input_rows_start_at_one(tmp_path: Path, typed_dates: bool) -> None:
    path = parquet_table(tmp_path, typed_dates=typed_dates)
    raw = read_raw_table(path)
    assert raw.first_row == 1
    v = validate_forecasts([raw])
    (err,) = errors(v.problems)
    assert (err.check, err.rows, err.model) == ("missing-number", (8,), "quillbeck")
    assert err.values == ("",)
    assert len(v.table) == 5
    assert v.table["issued"].dt.strftime("%Y-%m-%d").unique().tolist() == ["2026-11-02"]
    assert v.table["horizon"].unique().tolist() == [1]
    assert v.excluded["rows"].tolist() == ["6-10"]


def test_parquet_timestamp_with_a_time_of_day_is_not_a_date(tmp_path: Path) -> None:
    rows = [line.split(",") for line in fc_lines()]
    table = pa.table(
        {
            "model": [r[0] for r in rows],
            "region": [r[1] for r in rows],
            "quantity": [r[2] for r in rows],
            "issued": pa.array([dt.datetime(2026, 11, 2, 9, 30)] * 5, type=pa.timestamp("us")),
            "week_ending": [r[4] for r in rows],
            "level": [float(r[5]) for r in rows],
            "value": [float(r[6]) for r in rows],
        }
    )
    pq.write_table(table, tmp_path / "a.parquet")
    v = validate_forecasts([read_raw_table(tmp_path / "a.parquet")])
    (err,) = errors(v.problems)
    assert err.check == "bad-date"
    assert err.values == ("2026-11-02 09:30:00",)


def test_unknown_extension_and_unreadable_content_raise_input_error(tmp_path: Path) -> None:
    (tmp_path / "a.xlsx").write_text("model\n", encoding="utf-8")
    with pytest.raises(InputError, match=r"a\.xlsx: unknown file type; fix: "):
        read_raw_table(tmp_path / "a.xlsx")
    (tmp_path / "b.csv").write_bytes(bytes(range(128, 256)) * 4)
    with pytest.raises(InputError, match=r"b\.csv: cannot be read as a table .*; fix: "):
        read_raw_table(tmp_path / "b.csv")
    (tmp_path / "c.csv").write_bytes(b"")
    with pytest.raises(InputError, match=r"c\.csv: the file is empty; fix: "):
        read_raw_table(tmp_path / "c.csv")
    (tmp_path / "d.parquet").write_bytes(b"PAR1 not really")
    with pytest.raises(InputError, match=r"d\.parquet: cannot be read as a table"):
        read_raw_table(tmp_path / "d.parquet")
    with pytest.raises(InputError, match=r"no such file"):
        read_raw_table(tmp_path / "missing.csv")


def test_resolve_inputs_folders_globs_and_lists(tmp_path: Path) -> None:
    subs = tmp_path / "submissions"
    a = write(subs / "quillbeck" / "2026-11-02.csv", fc_lines(model="quillbeck"))
    b = write(subs / "hollowpine" / "2026-11-02.csv", fc_lines())
    c = subs / "hollowpine" / "2026-10-26.parquet"
    c.write_bytes(b"")
    (subs / "hollowpine" / "notes.txt").write_text("not a table", encoding="utf-8")
    (subs / "hollowpine" / "~$2026-11-02.csv").write_text("lock file", encoding="utf-8")
    (subs / ".hidden.csv").write_text("hidden", encoding="utf-8")

    assert resolve_inputs(subs) == sorted([a, b, c])
    assert resolve_inputs(str(subs)) == sorted([a, b, c])
    assert resolve_inputs(str(subs / "**" / "*.csv")) == sorted([a, b])
    assert resolve_inputs(str(subs / "quill*" / "*.csv")) == [a]
    assert resolve_inputs([a, str(subs / "hollowpine")]) == [a, c, b]
    assert resolve_inputs(b) == [b]


@pytest.mark.parametrize(
    ("make", "spec", "words"),
    [
        ("empty-folder", "empty", "this folder holds no .csv or .parquet files; fix: "),
        ("text-folder", "texts", "this folder holds no .csv or .parquet files; fix: "),
        ("pattern", "texts/*.csv", "no CSV or Parquet files match this pattern; fix: "),
        ("missing", "nowhere.csv", "no such file or folder; fix: "),
    ],
)
def test_resolve_inputs_says_what_is_wrong(
    tmp_path: Path, make: str, spec: str, words: str
) -> None:
    (tmp_path / "empty").mkdir()
    (tmp_path / "texts").mkdir()
    (tmp_path / "texts" / "readme.txt").write_text("x", encoding="utf-8")
    with pytest.raises(InputError) as info:
        resolve_inputs(str(tmp_path / spec))
    assert str(info.value).startswith(str(tmp_path / spec) + ": ")
    assert words in str(info.value)


def test_folder_of_team_files_with_one_broken_file(tmp_path: Path) -> None:
    subs = tmp_path / "submissions"
    write(subs / "hollowpine.csv", fc_lines())
    write(subs / "quillbeck.csv", fc_lines(model="quillbeck", values=(1, 2, "twelve", 4, 5)))
    broken = subs / "tansyforge.csv"
    broken.write_bytes(b"\xff\xfe\x00garbage\x00\x81")
    v = load_forecasts(subs)
    assert set(v.table["model"]) == {"hollowpine"}
    assert len(v.table) == 5
    unreadable = [p for p in v.problems if p.check == "unreadable-file"]
    assert len(unreadable) == 1
    assert unreadable[0].file == str(broken)
    assert unreadable[0].line().startswith(f"error: {broken}: cannot be read as a table")
    assert "; fix: save it as" in unreadable[0].line()
    assert sorted(v.excluded["file"]) == sorted([str(broken), str(subs / "quillbeck.csv")])
    assert v.excluded.loc[v.excluded["file"] == str(broken), "rows"].tolist() == ["all"]


def test_a_single_unreadable_file_raises(tmp_path: Path) -> None:
    (tmp_path / "a.csv").write_bytes(b"")
    with pytest.raises(InputError, match="the file is empty"):
        load_forecasts(tmp_path / "a.csv")


def test_parse_column_map() -> None:
    assert parse_column_map("value=quantile_value, level=prob") == {
        "quantile_value": "value",
        "prob": "level",
    }
    assert parse_column_map(None) == {}
    assert parse_column_map("") == {}
    for bad in ("value", "value=", "=prob", "value:prob"):
        with pytest.raises(ConfigError, match=r"is not of the form ours=theirs; fix: "):
            parse_column_map(bad)


@pytest.mark.parametrize("suffix", [".csv", ".parquet"])
def test_column_mapping_reads_differently_named_files(tmp_path: Path, suffix: str) -> None:
    theirs = "team,area,target,forecast_date,target_end_date,prob,quantile_value"
    lines = fc_lines(model="007")  # a model name that only survives when read as text
    if suffix == ".csv":
        path = write(tmp_path / f"a{suffix}", lines, header=theirs)
    else:
        frame = pd.DataFrame([line.split(",") for line in lines], columns=theirs.split(","))
        frame["prob"] = frame["prob"].astype(float)
        frame["quantile_value"] = frame["quantile_value"].astype(float)
        path = tmp_path / f"a{suffix}"
        frame.to_parquet(path)
    mapping = parse_column_map(
        "model=team,region=area,quantity=target,issued=forecast_date,"
        "week_ending=target_end_date,level=prob,value=quantile_value"
    )
    unmapped = validate_forecasts([read_raw_table(path)])
    assert len(errors(unmapped.problems)) == 7
    v = validate_forecasts([read_raw_table(path, columns=mapping)])
    assert v.problems == ()
    assert v.table["model"].unique().tolist() == ["007"]
    assert v.table["value"].tolist() == list(map(float, VALUES))


def test_column_mapping_onto_an_existing_column_is_refused(tmp_path: Path) -> None:
    path = write(
        tmp_path / "a.csv", [line + ",99" for line in fc_lines()], header=HEADER + ",quantile_value"
    )
    with pytest.raises(InputError) as info:
        read_raw_table(path, columns=parse_column_map("value=quantile_value"))
    text = str(info.value)
    assert text.startswith(f"{path}: column 'value'")
    assert "'quantile_value'" in text
    assert "appears more than once; fix: " in text


# --------------------------------------------------------------------------------------------
# observations


def validate_obs(path: Path, **kwargs: object) -> ValidatedObservations:
    return validate_observations([read_raw_table(path)], **kwargs)  # type: ignore[arg-type]


def test_clean_observations_without_vintages(tmp_path: Path) -> None:
    path = write(
        tmp_path / "o.csv",
        ["northvale,admissions,2026-11-07,57", "northvale,admissions,2026-11-14,61"],
        OBS_HEADER,
    )
    o = validate_obs(path)
    assert o.problems == ()
    assert not o.has_vintages
    assert o.table["reported"].isna().all()
    assert o.table["value"].tolist() == [57.0, 61.0]


@pytest.mark.parametrize(
    ("line", "check", "shown"),
    [
        ("northvale,admissions,2026-11-14,twelve", "not-a-number", "twelve"),
        ("northvale,admissions,2026-11-14,", "missing-number", ""),
        ("northvale,admissions,2026-11-14,inf", "infinite", "inf"),
        ("northvale,admissions,2026-11-14,-3", "negative", "-3"),
        ("northvale,admissions,14/11/2026,3", "bad-date", "14/11/2026"),
        (",admissions,2026-11-14,3", "empty", ""),
    ],
)
def test_bad_observation_row_is_quarantined_alone(
    tmp_path: Path, line: str, check: str, shown: str
) -> None:
    good = ["northvale,admissions,2026-11-07,57", "saltmarsh,admissions,2026-11-14,12"]
    path = write(tmp_path / "o.csv", [good[0], line, good[1]], OBS_HEADER)
    o = validate_obs(path)
    (err,) = errors(o.problems)
    assert (err.check, err.rows, err.model) == (check, (3,), "")
    assert shown in err.values[0]
    assert err.line().startswith(f"error: {path} row 3: ")
    assert o.excluded["rows"].tolist() == ["3"]
    assert o.excluded["kind"].tolist() == ["observation"]
    assert len(o.table) == 2


def test_conflicting_observation_duplicates_without_reported(tmp_path: Path) -> None:
    lines = [
        "northvale,admissions,2026-11-07,57",
        "northvale,admissions,2026-11-07,59",
        "northvale,admissions,2026-11-14,61",
        "northvale,admissions,2026-11-14,61",
    ]
    o = validate_obs(write(tmp_path / "o.csv", lines, OBS_HEADER))
    (err,) = errors(o.problems)
    assert (err.check, err.rows) == ("duplicate", (2, 3))
    assert "reported" in err.fix
    (warn,) = warnings_(o.problems)  # equal values: a warning, not an error
    assert (warn.check, warn.rows) == ("duplicate", (5,))
    assert o.table["week_ending"].dt.strftime("%Y-%m-%d").tolist() == ["2026-11-14"]
    assert sorted(o.excluded["rows"]) == ["2", "3"]


def test_vintages_distinguish_duplicates(tmp_path: Path) -> None:
    header = OBS_HEADER + ",reported"
    lines = [
        "northvale,admissions,2026-11-07,50,2026-11-09",
        "northvale,admissions,2026-11-07,57,2026-11-16",
        "northvale,admissions,2026-11-14,61,2026-11-16",
        "northvale,admissions,2026-11-14,64,2026-11-16",
        "northvale,admissions,2026-11-21,70,2026-11-20",
    ]
    o = validate_obs(write(tmp_path / "o.csv", lines, header))
    assert o.has_vintages
    assert {(p.check, p.rows) for p in errors(o.problems)} == {
        ("duplicate", (4, 5)),  # same week and same reported date, different values
        ("reported-before-week", (6,)),
    }
    assert o.table["value"].tolist() == [50.0, 57.0]


def test_future_observations_are_warned_and_kept(tmp_path: Path) -> None:
    header = OBS_HEADER + ",reported"
    lines = [
        "northvale,admissions,2026-11-07,50,2026-11-09",
        "northvale,admissions,2026-11-07,57,2026-12-07",
        "northvale,admissions,2026-12-05,70,2026-12-07",
    ]
    o = validate_obs(write(tmp_path / "o.csv", lines, header), as_of=pd.Timestamp("2026-11-30"))
    assert errors(o.problems) == []
    (warn,) = o.problems
    assert (warn.check, warn.rows) == ("future", (3, 4))
    assert "2026-11-30" in warn.message
    assert warn.values == ("2026-11-07 (reported 2026-12-07)", "2026-12-05 (reported 2026-12-07)")
    assert len(o.table) == 3


def test_signed_observations(tmp_path: Path) -> None:
    path = write(tmp_path / "o.csv", ["northvale,growth_rate,2026-11-07,-0.2"], OBS_HEADER)
    assert [p.check for p in validate_obs(path).problems] == ["negative"]
    assert validate_obs(path, signed=("growth_rate",)).problems == ()


def test_regions_and_quantities_never_observed_are_warned(tmp_path: Path) -> None:
    f = validate_csv(
        write(
            tmp_path / "f.csv",
            [*fc_lines(), *fc_lines(region="saltmarsh"), *fc_lines(quantity="deaths")],
        )
    )
    o = validate_obs(write(tmp_path / "o.csv", ["northvale,admissions,2026-11-07,57"], OBS_HEADER))
    found = {(p.column, p.values) for p in cross_check(f, o)}
    assert found == {("region", ("saltmarsh",)), ("quantity", ("deaths",))}
    assert all(p.severity == "warning" for p in cross_check(f, o))


def test_load_observations_reads_a_folder(tmp_path: Path) -> None:
    write(tmp_path / "obs" / "north.csv", ["northvale,admissions,2026-11-07,57"], OBS_HEADER)
    write(tmp_path / "obs" / "salt.csv", ["saltmarsh,admissions,2026-11-07,12"], OBS_HEADER)
    o = load_observations(tmp_path / "obs")
    assert o.table["region"].tolist() == ["northvale", "saltmarsh"]


# --------------------------------------------------------------------------------------------
# vintages: what was known when


def vintage_table(tmp_path: Path) -> pd.DataFrame:
    header = OBS_HEADER + ",reported"
    lines = [
        "northvale,admissions,2026-11-07,40,2026-11-09",  # first report
        "northvale,admissions,2026-11-07,52,2026-11-16",  # revised up a week later
        "northvale,admissions,2026-11-07,55,2026-11-30",  # and again, late
        "northvale,admissions,2026-11-14,61,2026-11-16",
        "northvale,admissions,2026-11-21,30,2026-11-23",
        "saltmarsh,admissions,2026-11-07,12,2026-11-09",
    ]
    o = validate_obs(write(tmp_path / "o.csv", lines, header))
    assert o.problems == ()
    return o.table


def known(table: pd.DataFrame, day: str, **kwargs: object) -> dict[tuple[str, str], float]:
    out = observations_as_of(table, as_of=pd.Timestamp(day), **kwargs)  # type: ignore[arg-type]
    return {
        (r, w.strftime("%Y-%m-%d")): v
        for r, w, v in zip(out["region"], out["week_ending"], out["value"], strict=True)
    }


def test_as_of_uses_the_latest_vintage_reported_by_then(tmp_path: Path) -> None:
    t = vintage_table(tmp_path)
    assert known(t, "2026-11-08") == {}  # nothing reported yet
    assert known(t, "2026-11-09") == {
        ("northvale", "2026-11-07"): 40,
        ("saltmarsh", "2026-11-07"): 12,
    }
    assert known(t, "2026-11-20") == {
        ("northvale", "2026-11-07"): 52,
        ("northvale", "2026-11-14"): 61,
        ("saltmarsh", "2026-11-07"): 12,
    }
    later = known(t, "2026-11-30")
    assert later[("northvale", "2026-11-07")] == 55
    assert later[("northvale", "2026-11-21")] == 30


def test_a_vintage_reported_after_the_date_is_never_used(tmp_path: Path) -> None:
    t = vintage_table(tmp_path)
    for day in pd.date_range("2026-11-01", "2026-12-10"):
        out = observations_as_of(t, as_of=day)
        assert (out["reported"] <= day).all()
        assert (out["week_ending"] <= day).all()
        assert not out.duplicated(["region", "quantity", "week_ending"]).any()


def test_weeks_before_limits_the_weeks_not_the_vintages(tmp_path: Path) -> None:
    t = vintage_table(tmp_path)
    got = known(t, "2026-11-30", weeks_before=pd.Timestamp("2026-11-14"))
    assert got == {("northvale", "2026-11-07"): 55, ("saltmarsh", "2026-11-07"): 12}


def test_without_vintages_the_single_value_is_used(tmp_path: Path) -> None:
    o = validate_obs(
        write(
            tmp_path / "o.csv",
            ["northvale,admissions,2026-11-07,57", "northvale,admissions,2026-11-14,61"],
            OBS_HEADER,
        )
    )
    assert known(o.table, "2026-11-10") == {("northvale", "2026-11-07"): 57}
    assert known(o.table, "2026-11-14") == {
        ("northvale", "2026-11-07"): 57,
        ("northvale", "2026-11-14"): 61,
    }


def test_revisions_between_two_dates(tmp_path: Path) -> None:
    t = vintage_table(tmp_path)
    rev = revisions_between(t, earlier=pd.Timestamp("2026-11-10"), later=pd.Timestamp("2026-11-30"))
    assert rev[["value_then", "value_now", "change"]].to_numpy().tolist() == [[40, 55, 15]]


# --------------------------------------------------------------------------------------------
# message format


def test_problem_line_format() -> None:
    p = Problem(
        "error",
        "not-a-number",
        "subs/a.csv",
        (9,),
        "hollowpine",
        "value",
        ("twelve",),
        "the quantile value is not a number",
        "write the quantile value as a plain number such as 12",
    )
    assert p.line() == (
        "error: subs/a.csv row 9 (model 'hollowpine'): value 'twelve': the quantile value is "
        "not a number; fix: write the quantile value as a plain number such as 12"
    )
    many = Problem(
        "warning", "x", "f.csv", (2, 3, 4, 9), "", "value", ("1", "2", "3", "4", "5", "6"), "m", "f"
    )
    assert (
        many.line() == "warning: f.csv rows 2-4, 9: value '1', '2', '3', '4' and 2 more: m; fix: f"
    )


def test_format_rows() -> None:
    assert format_rows([9, 2, 3, 4]) == "2-4, 9"
    assert format_rows([]) == ""
    assert format_rows(range(2, 40, 2)) == "2, 4, 6, 8, 10, 12, 14, 16 and 11 more"
