"""Input checks: every problem becomes one readable line; a faulty row quarantines its forecast.

A *forecast* is one model's quantiles for one (region, quantity, issued, week_ending). Any
error in one of its rows quarantines that whole forecast and nothing else; everything else goes
on to scoring. Warnings never remove data. Every check is vectorised over rows.

Row numbers are as a reader sees the file: in a CSV the header is row 1 (as a spreadsheet
shows it), so the first data row is row 2; in Parquet the first data row is row 1.
"""

from __future__ import annotations

import datetime as dt
from collections.abc import Callable, Collection, Sequence
from dataclasses import dataclass, field
from typing import Any, Literal

import numpy as np
import pandas as pd

from forebrief.tables.keys import group_codes
from forebrief.tables.raw import RawFile
from forebrief.tables.schema import (
    CM_LEVELS,
    FORECAST_COLUMNS,
    OBSERVATION_COLUMNS,
    OPTIONAL_OBSERVATION_COLUMNS,
)

__all__ = [
    "CheckReport",
    "Problem",
    "ValidatedForecasts",
    "ValidatedObservations",
    "cross_check",
    "validate_forecasts",
    "validate_observations",
]

Severity = Literal["error", "warning"]
_LEVEL_DECIMALS = 9  # levels equal to 9 decimals are the same level
_MAX_VALUES_SHOWN = 4
_MAX_RANGES_SHOWN = 8


@dataclass(frozen=True)
class Problem:
    """One reported problem: which file and rows, which model, what value, and how to fix it."""

    severity: Severity
    check: str
    file: str
    rows: tuple[int, ...]
    model: str
    column: str
    values: tuple[str, ...]
    message: str
    fix: str

    def line(self) -> str:
        """The one-line message shown to the user."""
        where = self.file
        if self.rows:
            word = "row" if len(self.rows) == 1 else "rows"
            where += f" {word} {format_rows(self.rows)}"
        who = f" (model {self.model!r})" if self.model else ""
        shown = ""
        if self.values:
            vals = ", ".join(repr(v) for v in self.values[:_MAX_VALUES_SHOWN])
            more = len(self.values) - _MAX_VALUES_SHOWN
            shown = f": {self.column} {vals}" + (f" and {more} more" if more > 0 else "")
        return f"{self.severity}: {where}{who}{shown}: {self.message}; fix: {self.fix}"


def format_rows(rows: Sequence[int]) -> str:
    """Compress sorted row numbers to ranges: (2, 3, 4, 9) -> '2-4, 9'."""
    arr = np.unique(np.asarray(rows, dtype=np.int64))
    if arr.size == 0:
        return ""
    breaks = np.flatnonzero(np.diff(arr) != 1) + 1
    starts = np.r_[arr[0], arr[breaks]]
    ends = np.r_[arr[breaks - 1], arr[-1]]
    parts = [f"{s}" if s == e else f"{s}-{e}" for s, e in zip(starts, ends, strict=True)]
    if len(parts) > _MAX_RANGES_SHOWN:
        rest = int(arr.size - np.sum((ends - starts + 1)[:_MAX_RANGES_SHOWN]))
        return ", ".join(parts[:_MAX_RANGES_SHOWN]) + f" and {rest} more"
    return ", ".join(parts)


@dataclass(frozen=True)
class ValidatedForecasts:
    """Clean forecast rows (with ``horizon``), the quarantined forecasts, and the problems."""

    table: pd.DataFrame
    excluded: pd.DataFrame
    problems: tuple[Problem, ...]
    files: tuple[str, ...] = ()


@dataclass(frozen=True)
class ValidatedObservations:
    """Clean observation rows (``reported`` is NaT when the file has no vintages)."""

    table: pd.DataFrame
    excluded: pd.DataFrame
    problems: tuple[Problem, ...]
    has_vintages: bool = False
    files: tuple[str, ...] = ()


EXCLUDED_COLUMNS = (
    "kind",
    "file",
    "rows",
    "model",
    "region",
    "quantity",
    "issued",
    "week_ending",
    "reason",
)


@dataclass(frozen=True)
class CheckReport:
    """Everything ``forebrief check`` reports."""

    problems: tuple[Problem, ...]
    forecasts: ValidatedForecasts | None = None
    observations: ValidatedObservations | None = None
    extra: tuple[str, ...] = field(default_factory=tuple)

    @property
    def n_errors(self) -> int:
        return sum(p.severity == "error" for p in self.problems)

    @property
    def n_warnings(self) -> int:
        return sum(p.severity == "warning" for p in self.problems)


# --------------------------------------------------------------------------------------------
# shared helpers


class _Collector:
    """Collects per-row check results and turns them into grouped Problem lines."""

    def __init__(self, frame: pd.DataFrame, files: Sequence[str]) -> None:
        self.frame = frame
        self.files = list(files)
        self.problems: list[Problem] = []
        self.error_rows = np.zeros(len(frame), dtype=bool)
        # (row positions, reason text per position): only the rows with the error, since a
        # full-length array per check costs more than the check itself on a large file
        self.reasons: list[tuple[np.ndarray, list[str]]] = []

    def add(
        self,
        mask: np.ndarray,
        *,
        check: str,
        column: str,
        message: str,
        fix: str,
        severity: Severity = "error",
        shown: pd.Series | Callable[[np.ndarray], Any] | None = None,
    ) -> None:
        """Report the rows in ``mask``; group them into one line per (file, model)."""
        mask = np.asarray(mask, dtype=bool)
        if not mask.any():
            return
        # only the columns needed, for only these rows (a row selection of the whole frame
        # costs tens of milliseconds per check on a large file)
        where = np.flatnonzero(mask)
        index = self.frame.index[where]
        texts: pd.Series | None = None
        if callable(shown):
            texts = pd.Series(shown(mask), index=index)
        elif column:
            texts = (shown if shown is not None else self.frame[column]).loc[mask]
        if severity == "error":
            self.error_rows |= mask
            if texts is not None:
                detail = [f"{message} ({column} {t!r})" for t in texts.astype(str)]
            else:
                detail = [message] * where.size
            self.reasons.append((where, detail))
        model = (
            self.frame["model"].iloc[where].astype(str)
            if "model" in self.frame.columns
            else pd.Series("", index=index)
        )
        grouped = pd.DataFrame(
            {
                "file": self.frame["_file"].to_numpy()[where],
                "model": model.to_numpy(),
                "row": self.frame["_row"].to_numpy()[where],
                "text": texts.astype(str).to_numpy() if texts is not None else "",
            }
        )
        for (file_code, mdl), part in grouped.groupby(["file", "model"], sort=True):
            vals = tuple(dict.fromkeys(part["text"].tolist())) if column else ()
            self.problems.append(
                Problem(
                    severity=severity,
                    check=check,
                    file=self.files[int(file_code)],
                    rows=tuple(int(r) for r in part["row"]),
                    model=str(mdl),
                    column=column,
                    values=vals,
                    message=message,
                    fix=fix,
                )
            )

    def reason_per_row(self) -> np.ndarray:
        """A short reason text per row ("" for rows without errors)."""
        out = np.full(len(self.frame), "", dtype=object)
        for where, detail in self.reasons:
            for i, d in zip(where.tolist(), detail, strict=True):
                out[i] = d if not out[i] else f"{out[i]}; {d}"
        return out


def _file_problem(
    label: str,
    check: str,
    message: str,
    fix: str,
    *,
    severity: Severity = "error",
    column: str = "",
    values: tuple[str, ...] = (),
) -> Problem:
    return Problem(severity, check, label, (), "", column, values, message, fix)


def _check_columns(
    raw: RawFile, required: Sequence[str], optional: Sequence[str], kind: str
) -> list[Problem]:
    """Missing columns are errors (the file cannot be used); unknown ones are warnings."""
    import difflib

    present = list(raw.frame.columns)
    missing = [c for c in required if c not in present]
    known = set(required) | set(optional)
    unknown = [c for c in present if c not in known]
    problems: list[Problem] = []
    for col in missing:
        close = difflib.get_close_matches(col, unknown, n=1, cutoff=0.5)
        hint = (
            f"rename column {close[0]!r} to {col!r}, or pass --columns {col}={close[0]}"
            if close
            else f"add a column {col!r}, or map yours with --columns {col}=YOURNAME"
        )
        problems.append(
            _file_problem(
                raw.label,
                "missing-column",
                f"required {kind} column {col!r} is missing (columns found: {', '.join(present)}); "
                "the file cannot be used",
                hint,
                column="column",
                values=(col,),
            )
        )
    for col in unknown:
        problems.append(
            _file_problem(
                raw.label,
                "unknown-column",
                f"not part of the {kind} format; the column is ignored",
                "remove it, or map it to a forebrief column with --columns ours=" + col,
                severity="warning",
                column="column",
                values=(col,),
            )
        )
    return problems


def _no_rows_warning(raw: RawFile, kind: str) -> list[Problem]:
    """A file with a header and no data rows adds nothing; say so rather than pass silently."""
    if len(raw.frame):
        return []
    return [
        _file_problem(
            raw.label,
            "no-rows",
            f"the {kind} file has a header but no data rows",
            "check the export; a file with nothing to add can be removed",
            severity="warning",
        )
    ]


def _stack(files: Sequence[RawFile], columns: Sequence[str]) -> tuple[pd.DataFrame, list[str]]:
    """Concatenate usable files, keeping the file code and the row number of every row."""
    parts = []
    labels = []
    for code, raw in enumerate(files):
        labels.append(raw.label)
        frame = raw.frame.loc[:, [c for c in columns if c in raw.frame.columns]].copy()
        frame["_file"] = code
        frame["_row"] = np.arange(len(frame), dtype=np.int64) + raw.first_row
        parts.append(frame)
    if not parts:
        empty = pd.DataFrame({c: pd.Series(dtype=object) for c in columns})
        empty["_file"] = pd.Series(dtype=np.int64)
        empty["_row"] = pd.Series(dtype=np.int64)
        return empty, labels
    return pd.concat(parts, ignore_index=True), labels


def _cell_text(v: object) -> str:
    """One cell as text: '' for empty/NaN/NaT; a date (Parquet date or midnight timestamp) as
    YYYY-MM-DD so that typed date columns read like the text ones."""
    if v is None or v is pd.NaT or (isinstance(v, float) and np.isnan(v)):
        return ""
    if isinstance(v, np.datetime64):
        v = pd.Timestamp(v)
    if isinstance(v, dt.datetime):
        if (v.hour, v.minute, v.second, v.microsecond) == (0, 0, 0, 0):
            return v.strftime("%Y-%m-%d")
        return str(v)
    if isinstance(v, dt.date):
        return v.strftime("%Y-%m-%d")
    return str(v).strip()


@dataclass(frozen=True)
class _TextColumn:
    """A column as stripped text, with an integer code per row: rows with equal text have
    equal codes, and ``distinct[codes]`` is the text."""

    text: pd.Series
    codes: np.ndarray
    distinct: np.ndarray


def _text_column(series: pd.Series) -> _TextColumn:
    """Clean each distinct value once and expand by ``take`` (building a million-row text
    column element by element costs a fifth of a second per column). O(rows)."""
    codes, uniques = pd.factorize(series, use_na_sentinel=False)
    cleaned = pd.Series(uniques, dtype=object).map(_cell_text)
    # two raw values may clean to one text (' a' and 'a'): number the cleaned texts afresh
    canon, distinct = pd.factorize(cleaned.to_numpy(dtype=object), use_na_sentinel=False)
    row_codes = canon.astype(np.int64)[codes]
    distinct = np.asarray(distinct, dtype=object)
    values = pd.Series(distinct, dtype="str").array
    if (
        series.dtype == values.dtype
        and len(uniques) == len(distinct)
        and all(isinstance(u, str) and u == t for u, t in zip(uniques, cleaned, strict=True))
    ):
        # already clean text of the right type (the usual case): nothing to convert
        return _TextColumn(series, row_codes, distinct)
    text = pd.Series(values.take(row_codes), index=series.index)
    return _TextColumn(text, row_codes, distinct)


def _text(series: pd.Series) -> pd.Series:
    """A column as stripped text ('' for empty cells); converts each distinct value once."""
    return _text_column(series).text


def _column_dates(col: _TextColumn) -> tuple[pd.Series, np.ndarray]:
    """Parse a text column's ISO dates once per distinct text (NaT where not a date); also
    return an integer code per row that is equal exactly when the parsed dates are equal."""
    parsed = pd.to_datetime(
        pd.Series(col.distinct, dtype=object).astype(str), format="%Y-%m-%d", errors="coerce"
    )
    values = parsed.to_numpy()
    dates = pd.Series(values[col.codes], index=col.text.index, dtype="datetime64[ns]")
    date_codes, _ = pd.factorize(values, use_na_sentinel=False)
    return dates, date_codes.astype(np.int64)[col.codes]


def _parse_dates(text: pd.Series) -> pd.Series:
    """Parse ISO dates (YYYY-MM-DD); NaT where the text is not one. Parses each distinct text once."""
    codes, uniques = pd.factorize(text, use_na_sentinel=False)
    parsed = pd.to_datetime(
        pd.Series(uniques, dtype=object).astype(str), format="%Y-%m-%d", errors="coerce"
    )
    return pd.Series(parsed.to_numpy()[codes], index=text.index, dtype="datetime64[ns]")


class _NumberText:
    """The text of a numeric column, made only for the rows asked for (``.loc[mask]`` or
    ``[mask]``, like a Series): formatting every row of a large file costs seconds.

    An empty cell is '' (``astype(str)`` keeps NaN missing under pandas' string dtype, and an
    empty cell would then be reported as "not a number"); -1.0 is shown as '-1'.
    """

    def __init__(self, values: pd.Series) -> None:
        self._values = values

    @property
    def loc(self) -> _NumberText:
        return self

    def __getitem__(self, mask: Any) -> pd.Series:
        sub = self._values[mask]
        return pd.Series([_float_text(v) for v in sub.to_numpy()], index=sub.index, dtype=object)


def _float_text(v: float) -> str:
    if np.isnan(v):
        return ""
    return str(np.format_float_positional(v, trim="-"))


def _parse_numbers(col: pd.Series) -> tuple[pd.Series, pd.Series]:
    """Return (numbers, shown text); text that is not a number becomes NaN (reported by caller)."""
    if pd.api.types.is_numeric_dtype(col) and not pd.api.types.is_bool_dtype(col):
        values = col.astype(float)
        return values, _NumberText(values)
    text = _text(col)
    values = pd.to_numeric(text, errors="coerce").astype(float)
    return values, text


def _number_checks(
    c: _Collector, column: str, values: pd.Series, shown: pd.Series, *, what: str, example: str
) -> np.ndarray:
    """Report text that is not a number, empty cells, NaN and infinity. Returns the good mask."""
    arr = values.to_numpy(dtype=float)
    nan = np.isnan(arr)
    empty = np.zeros(arr.size, dtype=bool)
    text_nan = np.zeros(arr.size, dtype=bool)
    if nan.any():
        shown_str = shown.loc[nan].astype(str).str.strip()
        empty[nan] = shown_str.isin(["", "nan", "<NA>", "None"]).to_numpy()
        text_nan[nan] = shown_str.str.lower().isin(["nan", "na", "n/a", "null", "none"]).to_numpy()
    not_number = nan & ~empty & ~text_nan
    c.add(
        not_number,
        check="not-a-number",
        column=column,
        shown=shown,
        message=f"{what} is not a number",
        fix=f"write {what} as a plain number such as {example}",
    )
    c.add(
        (empty | text_nan) & np.isnan(arr),
        check="missing-number",
        column=column,
        shown=shown,
        message=f"{what} is empty or NaN",
        fix=f"fill in {what}, or remove the row if there is none",
    )
    inf = np.isinf(arr)
    c.add(
        inf,
        check="infinite",
        column=column,
        shown=shown,
        message=f"{what} is infinite",
        fix=f"write {what} as a finite number",
    )
    return np.isfinite(arr)


def _nonneg_mask(quantities: pd.Series, signed: Collection[str]) -> np.ndarray:
    """Rows whose quantity cannot be negative (every quantity but the ``signed`` ones)."""
    if not signed:
        return np.ones(len(quantities), dtype=bool)
    return ~quantities.isin(list(signed)).to_numpy()


# --------------------------------------------------------------------------------------------
# forecasts


def validate_forecasts(
    files: Sequence[RawFile],
    *,
    signed: Collection[str] = (),
    cm_levels: Sequence[float] = CM_LEVELS,
) -> ValidatedForecasts:
    """Check forecast files and split them into clean rows and quarantined forecasts.

    ``signed``: quantities that may be negative (all others are counts). ``cm_levels``: the levels the Classical Model needs (a forecast without them is
    kept for interval scores, with a warning). O(rows log rows) (one sort).
    """
    problems: list[Problem] = []
    usable: list[RawFile] = []
    file_excluded: list[dict[str, str]] = []
    for raw in files:
        col_problems = _check_columns(raw, FORECAST_COLUMNS, (), "forecast")
        problems.extend(col_problems)
        if any(p.severity == "error" for p in col_problems):
            models = ""
            if "model" in raw.frame.columns:
                models = ", ".join(sorted({str(m) for m in raw.frame["model"].dropna()})[:5])
            file_excluded.append(
                {
                    "kind": "forecast",
                    "file": raw.label,
                    "rows": "all",
                    "model": models,
                    "region": "",
                    "quantity": "",
                    "issued": "",
                    "week_ending": "",
                    "reason": "file lacks required column(s): "
                    + ", ".join(p.values[0] for p in col_problems if p.severity == "error"),
                }
            )
        else:
            usable.append(raw)
            problems.extend(_no_rows_warning(raw, "forecast"))
    frame, labels = _stack(usable, FORECAST_COLUMNS)
    c = _Collector(frame, labels)
    texts: dict[str, _TextColumn] = {}
    for col in ("model", "region", "quantity", "issued", "week_ending"):
        texts[col] = _text_column(frame[col])
        frame[col] = texts[col].text

    for col, what in (
        ("model", "the model name"),
        ("region", "the region"),
        ("quantity", "the quantity"),
    ):
        c.add(
            (frame[col] == "").to_numpy(),
            check="empty",
            column=col,
            message=f"{what} is empty",
            fix=f"fill in {what} on every row",
        )

    issued, issued_codes = _column_dates(texts["issued"])
    week_ending, week_codes = _column_dates(texts["week_ending"])
    for col, parsed in (("issued", issued), ("week_ending", week_ending)):
        c.add(
            parsed.isna().to_numpy() & (frame[col] != "").to_numpy(),
            check="bad-date",
            column=col,
            message=f"{col} is not an ISO date",
            fix=f"write {col} as YYYY-MM-DD, for example 2026-11-28",
        )
        c.add(
            (frame[col] == "").to_numpy(),
            check="empty",
            column=col,
            message=f"{col} is empty",
            fix=f"fill in {col} as YYYY-MM-DD",
        )

    level, level_text = _parse_numbers(frame["level"])
    value, value_text = _parse_numbers(frame["value"])
    level_ok = _number_checks(c, "level", level, level_text, what="the level", example="0.25")
    value_ok = _number_checks(
        c, "value", value, value_text, what="the quantile value", example="12"
    )
    lv = level.to_numpy()
    vv = value.to_numpy()
    out_of_range = level_ok & ((lv <= 0) | (lv >= 1))
    c.add(
        out_of_range,
        check="level-range",
        column="level",
        shown=level_text,
        message="the level must lie strictly between 0 and 1",
        fix="write the probability level as a fraction, e.g. 0.975 for the 97.5% quantile",
    )
    negative = value_ok & (vv < 0) & _nonneg_mask(frame["quantity"], signed)
    c.add(
        negative,
        check="negative",
        column="value",
        shown=value_text,
        message="a count cannot be negative",
        fix="floor the quantile at 0, or configure this quantity as one that may be negative",
    )
    dates_ok = issued.notna().to_numpy() & week_ending.notna().to_numpy()
    days = (week_ending - issued).dt.days.to_numpy(dtype=float)
    not_after = dates_ok & (days <= 0)
    c.add(
        not_after,
        check="target-not-after-issue",
        column="week_ending",
        shown=lambda m: frame["week_ending"][m] + " (issued " + frame["issued"][m] + ")",
        message="the target week must end after the issue date (horizon >= 1)",
        fix="check the two dates; a forecast of a week already over is not a forecast",
    )

    # forecast identity from the text as written, so that bad dates group among themselves
    fc, _ = group_codes(
        [texts[k].codes for k in ("model", "region", "quantity", "issued", "week_ending")]
    )
    # duplicates and crossing, on rows whose level is a number
    rlevel = np.where(level_ok, np.round(lv, _LEVEL_DECIMALS), np.nan)
    # rows sorted by forecast, then level (NaN last), then file order: one stable sort of a
    # combined key (the rank of each level among the distinct levels) does what a three-key
    # lexsort does, and is nearly linear on files already sorted by forecast and level
    distinct_levels = np.sort(pd.unique(rlevel))
    level_rank = np.searchsorted(distinct_levels, rlevel).astype(np.int64)
    order = np.argsort(fc * max(distinct_levels.size, 1) + level_rank, kind="stable")
    fc_s, lv_s, vv_s = fc[order], rlevel[order], vv[order]
    # (np.r_[False, <empty>] would have one element too many when there are no rows)
    same_key = np.zeros(len(frame), dtype=bool)
    same_key[1:] = (fc_s[1:] == fc_s[:-1]) & (lv_s[1:] == lv_s[:-1])
    # group duplicates: all rows in a run of identical (forecast, level)
    run_start = ~same_key
    run_id = np.cumsum(run_start) - 1
    run_size = np.bincount(run_id)
    in_dup_run = run_size[run_id] > 1
    vmin = np.full(run_size.size, np.inf)
    vmax = np.full(run_size.size, -np.inf)
    vfill = np.where(np.isnan(vv_s), np.inf, vv_s)
    np.minimum.at(vmin, run_id, vfill)
    np.maximum.at(vmax, run_id, np.where(np.isnan(vv_s), -np.inf, vv_s))
    conflicting = in_dup_run & (vmin[run_id] != vmax[run_id])
    identical_extra = same_key & ~conflicting
    dup_conflict = np.zeros(len(frame), dtype=bool)
    dup_conflict[order] = conflicting
    dup_identical = np.zeros(len(frame), dtype=bool)
    dup_identical[order] = identical_extra

    def key_text(m: np.ndarray) -> pd.Series:
        return "level " + level_text[m].astype(str) + ", value " + value_text[m].astype(str)

    c.add(
        dup_conflict,
        check="duplicate",
        column="row",
        shown=key_text,
        message="duplicate: the same model, region, quantity, issued, week_ending and level "
        "appear more than once with different values",
        fix="keep one row per level; forebrief will not guess which value is right",
    )
    c.add(
        dup_identical,
        check="duplicate",
        column="row",
        shown=key_text,
        severity="warning",
        message="duplicate: an identical copy of an earlier row; the copy is ignored",
        fix="remove the repeated row",
    )
    # crossing: consecutive distinct levels within a forecast with decreasing values
    nxt_same_fc = np.r_[fc_s[1:] == fc_s[:-1], False]
    first_of_run = run_start
    # compare each run's first row with the next run's first row in the same forecast
    idx_first = np.flatnonzero(first_of_run)
    if idx_first.size > 1:
        a, b = idx_first[:-1], idx_first[1:]
        same = fc_s[a] == fc_s[b]
        in_range = (lv_s > 0) & (lv_s < 1)  # False for NaN: bad levels are reported already
        dec = (
            same
            & (vv_s[b] < vv_s[a])
            & np.isfinite(vv_s[a])
            & np.isfinite(vv_s[b])
            & in_range[a]
            & in_range[b]
        )
        cross_rows = np.zeros(len(frame), dtype=bool)
        cross_rows[order[a[dec]]] = True
        cross_rows[order[b[dec]]] = True
        shown_cross = np.full(len(frame), "", dtype=object)
        for aa, bb in zip(a[dec], b[dec], strict=True):
            shown_cross[order[bb]] = (
                f"{vv_s[bb]:g} at level {lv_s[bb]:g} below {vv_s[aa]:g} at level {lv_s[aa]:g}"
            )
            if shown_cross[order[aa]] == "":
                shown_cross[order[aa]] = shown_cross[order[bb]]
        c.add(
            cross_rows,
            check="crossing",
            column="quantiles",
            shown=pd.Series(shown_cross, index=frame.index),
            message="quantiles decrease as the level rises (crossing quantiles)",
            fix="sort the values so that a higher level never has a lower value",
        )
    del nxt_same_fc

    # quarantine every forecast with an error row
    bad_fc = np.unique(fc[c.error_rows])
    quarantined = np.isin(fc, bad_fc)
    reasons = c.reason_per_row()
    excluded = _excluded_forecasts(frame, fc, quarantined, reasons, labels)
    if file_excluded:
        excluded = pd.concat([pd.DataFrame(file_excluded), excluded], ignore_index=True)

    keep = ~quarantined & ~dup_identical
    clean = pd.DataFrame(
        {
            # text columns stay in their own array type (no element-by-element conversion)
            "model": frame["model"].array[keep],
            "region": frame["region"].array[keep],
            "quantity": frame["quantity"].array[keep],
            "issued": issued.to_numpy()[keep],
            "week_ending": week_ending.to_numpy()[keep],
            "level": rlevel[keep],
            "value": vv[keep],
            "horizon": np.ceil(days[keep] / 7.0).astype(np.int64),
        }
    )
    clean_file = frame["_file"].to_numpy()[keep]
    clean_row = frame["_row"].to_numpy()[keep]
    problems.extend(c.problems)
    # forecast identity of the clean rows from codes: text for the names, parsed dates
    clean_fc = group_codes(
        [
            texts["model"].codes[keep],
            texts["region"].codes[keep],
            texts["quantity"].codes[keep],
            issued_codes[keep],
            week_codes[keep],
        ]
    )
    problems.extend(
        _level_warnings(clean, clean_file, clean_row, labels, cm_levels, codes=clean_fc)
    )
    problems.extend(_superseded_warnings(clean, clean_file, clean_row, labels, fc=clean_fc[0]))
    return ValidatedForecasts(
        table=clean.reset_index(drop=True),
        excluded=excluded.reset_index(drop=True),
        problems=tuple(problems),
        files=tuple(r.label for r in files),
    )


def _excluded_forecasts(
    frame: pd.DataFrame,
    fc: np.ndarray,
    quarantined: np.ndarray,
    reasons: np.ndarray,
    labels: Sequence[str],
) -> pd.DataFrame:
    """One row per quarantined forecast, with its rows and every reason found."""
    if not quarantined.any():
        return pd.DataFrame(columns=list(EXCLUDED_COLUMNS))
    sub = frame.loc[
        quarantined, ["model", "region", "quantity", "issued", "week_ending", "_file", "_row"]
    ].copy()
    sub["_fc"] = fc[quarantined]
    sub["_reason"] = reasons[quarantined]
    rows = []
    for _, part in sub.groupby("_fc", sort=False):
        first = part.iloc[0]
        why = "; ".join(dict.fromkeys(r for r in part["_reason"] if r))
        rows.append(
            {
                "kind": "forecast",
                "file": labels[int(first["_file"])],
                "rows": format_rows(part["_row"].to_numpy()),
                "model": first["model"],
                "region": first["region"],
                "quantity": first["quantity"],
                "issued": first["issued"],
                "week_ending": first["week_ending"],
                "reason": why,
            }
        )
    out = pd.DataFrame(rows, columns=list(EXCLUDED_COLUMNS))
    return out.sort_values(
        ["file", "model", "region", "quantity", "issued", "week_ending"], kind="stable"
    )


def _level_warnings(
    clean: pd.DataFrame,
    files: np.ndarray,
    rows: np.ndarray,
    labels: Sequence[str],
    cm_levels: Sequence[float],
    *,
    codes: tuple[np.ndarray, int] | None = None,
) -> list[Problem]:
    """Warn about forecasts that lack the median or a Classical Model level.

    ``codes``: the forecast codes of ``clean`` and their number, if already known."""
    if clean.empty:
        return []
    if codes is None:
        codes = group_codes(
            [clean[k] for k in ("model", "region", "quantity", "issued", "week_ending")]
        )
    fc, n_fc = codes
    need = np.asarray(sorted(set(cm_levels) | {0.5}), dtype=float)
    lv = clean["level"].to_numpy()
    has = np.zeros((n_fc, need.size), dtype=bool)
    for j, t in enumerate(need):
        hit = np.abs(lv - t) < 1e-6
        has[fc[hit], j] = True
    lacking = ~has.all(axis=1)
    if not lacking.any():
        return []
    problems = []
    bad_rows = np.asarray(lacking)[fc]
    df = pd.DataFrame(
        {
            "file": files[bad_rows],
            "model": clean["model"].to_numpy()[bad_rows],
            "row": rows[bad_rows],
            "fc": fc[bad_rows],
        }
    )
    for (file_code, model), part in df.groupby(["file", "model"], sort=True):
        miss = ~has[np.unique(part["fc"].to_numpy())]
        missing_levels = need[miss.any(axis=0)]
        n = len(np.unique(part["fc"]))
        problems.append(
            Problem(
                "warning",
                "missing-levels",
                labels[int(file_code)],
                tuple(int(r) for r in part["row"]),
                str(model),
                "levels missing",
                tuple(f"{x:g}" for x in missing_levels),
                f"{n} forecast(s) lack the median or a Classical Model level; they are "
                "interval-scored but not Classical-Model-scored",
                "submit at least the levels " + ", ".join(f"{x:g}" for x in need),
            )
        )
    return problems


def _superseded_warnings(
    clean: pd.DataFrame,
    files: np.ndarray,
    rows: np.ndarray,
    labels: Sequence[str],
    *,
    fc: np.ndarray | None = None,
) -> list[Problem]:
    """Warn when a model has several forecasts for one target and horizon (the latest is used).

    ``fc``: the forecast codes of ``clean`` (first-appearance order), if already known."""
    if clean.empty:
        return []
    if fc is None:
        heads = clean.drop_duplicates(["model", "region", "quantity", "issued", "week_ending"])
    else:
        # the first row of each forecast, in file order (as drop_duplicates keeps it): codes
        # number forecasts by first appearance, so a first row is one whose code is new
        seen = np.maximum.accumulate(fc) if fc.size else fc
        first = np.ones(fc.size, dtype=bool)
        first[1:] = fc[1:] > seen[:-1]
        heads = clean.loc[
            first, ["model", "region", "quantity", "issued", "week_ending", "horizon"]
        ]
    dup = heads.duplicated(["model", "region", "quantity", "week_ending", "horizon"], keep="last")
    if not dup.any():
        return []
    problems = []
    old = heads.loc[dup]
    for model, part in old.groupby("model", sort=True):
        pos = part.index.to_numpy()
        problems.append(
            Problem(
                "warning",
                "superseded",
                labels[int(files[pos[0]])],
                tuple(int(r) for r in rows[pos]),
                str(model),
                "issued",
                tuple(dict.fromkeys(d.strftime("%Y-%m-%d") for d in part["issued"])),
                "a later forecast of the same target at the same horizon exists; "
                "only the latest issued one is scored",
                "send one forecast per target and horizon, or ignore this if a revision was meant",
            )
        )
    return problems


# --------------------------------------------------------------------------------------------
# observations


def validate_observations(
    files: Sequence[RawFile],
    *,
    signed: Collection[str] = (),
    as_of: pd.Timestamp | None = None,
) -> ValidatedObservations:
    """Check observation files (with optional ``reported`` vintages).

    A bad row is quarantined on its own; conflicting duplicates (the same week twice with
    different values and no distinguishing ``reported``) quarantine that week's values.
    Observations after ``as_of`` are kept but warned about (an as-of run ignores them).
    """
    problems: list[Problem] = []
    usable: list[RawFile] = []
    file_excluded: list[dict[str, str]] = []
    for raw in files:
        col_problems = _check_columns(
            raw, OBSERVATION_COLUMNS, OPTIONAL_OBSERVATION_COLUMNS, "observation"
        )
        problems.extend(col_problems)
        if any(p.severity == "error" for p in col_problems):
            file_excluded.append(
                {
                    "kind": "observation",
                    "file": raw.label,
                    "rows": "all",
                    "model": "",
                    "region": "",
                    "quantity": "",
                    "issued": "",
                    "week_ending": "",
                    "reason": "file lacks required column(s)",
                }
            )
        else:
            usable.append(raw)
            problems.extend(_no_rows_warning(raw, "observation"))
    has_vintages = any("reported" in r.frame.columns for r in usable)
    cols = (*OBSERVATION_COLUMNS, "reported") if has_vintages else OBSERVATION_COLUMNS
    frame, labels = _stack(usable, cols)
    if has_vintages and "reported" not in frame.columns:
        frame["reported"] = ""
    c = _Collector(frame, labels)
    for col in ("region", "quantity", "week_ending") + (("reported",) if has_vintages else ()):
        frame[col] = _text(frame[col])
    for col in ("region", "quantity"):
        c.add(
            (frame[col] == "").to_numpy(),
            check="empty",
            column=col,
            message=f"the {col} is empty",
            fix=f"fill in the {col} on every row",
        )
    week_ending = _parse_dates(frame["week_ending"])
    c.add(
        week_ending.isna().to_numpy() & (frame["week_ending"] != "").to_numpy(),
        check="bad-date",
        column="week_ending",
        message="week_ending is not an ISO date",
        fix="write week_ending as YYYY-MM-DD, for example 2026-11-28",
    )
    c.add(
        (frame["week_ending"] == "").to_numpy(),
        check="empty",
        column="week_ending",
        message="week_ending is empty",
        fix="fill in week_ending as YYYY-MM-DD",
    )
    if has_vintages:
        reported = _parse_dates(frame["reported"])
        c.add(
            reported.isna().to_numpy() & (frame["reported"] != "").to_numpy(),
            check="bad-date",
            column="reported",
            message="reported is not an ISO date",
            fix="write reported as YYYY-MM-DD, the date the value was published",
        )
        c.add(
            (frame["reported"] == "").to_numpy(),
            check="empty",
            column="reported",
            message="reported is empty in a file with vintages",
            fix="give the date each value was published",
        )
        early = (reported < week_ending).to_numpy()
        c.add(
            early,
            check="reported-before-week",
            column="reported",
            shown=lambda m: frame["reported"][m] + " (week_ending " + frame["week_ending"][m] + ")",
            message="the value is dated as published before its week ended",
            fix="check the reported and week_ending dates",
        )
    else:
        reported = pd.Series(pd.NaT, index=frame.index, dtype="datetime64[ns]")
    value, value_text = _parse_numbers(frame["value"])
    value_ok = _number_checks(
        c, "value", value, value_text, what="the observed value", example="57"
    )
    vv = value.to_numpy()
    c.add(
        value_ok & (vv < 0) & _nonneg_mask(frame["quantity"], signed),
        check="negative",
        column="value",
        shown=value_text,
        message="a count cannot be negative",
        fix="correct the value, or configure this quantity as one that may be negative",
    )

    # duplicates of one (region, quantity, week_ending[, reported])
    key_cols = [frame["region"], frame["quantity"], frame["week_ending"]]
    if has_vintages:
        key_cols.append(frame["reported"])
    key, n_key = group_codes(key_cols)
    counts = np.bincount(key, minlength=n_key)
    dup = counts[key] > 1
    vmin = np.full(n_key, np.inf)
    vmax = np.full(n_key, -np.inf)
    np.minimum.at(vmin, key, np.where(np.isnan(vv), np.inf, vv))
    np.maximum.at(vmax, key, np.where(np.isnan(vv), -np.inf, vv))
    conflict = dup & (vmin[key] != vmax[key])
    first = ~pd.Series(key).duplicated().to_numpy()
    identical_extra = dup & ~conflict & ~first
    c.add(
        conflict,
        check="duplicate",
        column="value",
        shown=value_text,
        message="duplicate: the same region, quantity and week_ending"
        + (" and reported date" if has_vintages else "")
        + " appear more than once with different values",
        fix=(
            "give each revision its own reported date"
            if has_vintages
            else "keep one value per week, or add a 'reported' column to keep revisions"
        ),
    )
    c.add(
        identical_extra,
        check="duplicate",
        column="value",
        shown=value_text,
        severity="warning",
        message="duplicate: an identical copy of an earlier row; ignored",
        fix="remove the repeated row",
    )
    if as_of is not None:
        future = (week_ending > as_of).to_numpy() | (reported > as_of).to_numpy()
        # show the reported date too: a past week can be in the future through its vintage
        shown_future: pd.Series | Callable[[np.ndarray], Any] = frame["week_ending"]
        if has_vintages:

            def shown_future(m: np.ndarray) -> pd.Series:
                return frame["week_ending"][m] + " (reported " + frame["reported"][m] + ")"

        c.add(
            future & ~c.error_rows,
            check="future",
            column="week_ending",
            shown=shown_future,
            severity="warning",
            message=f"observation dated after the as-of date {as_of:%Y-%m-%d}; "
            "a run as of that date ignores it",
            fix="nothing, if this is later data; otherwise check the dates",
        )
    bad = c.error_rows
    reasons = c.reason_per_row()
    ex = frame.loc[bad, ["region", "quantity", "week_ending", "_file", "_row"]].copy()
    excluded = pd.DataFrame(
        {
            "kind": "observation",
            "file": [labels[int(f)] for f in ex["_file"]],
            "rows": ex["_row"].astype(str).to_numpy(),
            "model": "",
            "region": ex["region"].to_numpy(),
            "quantity": ex["quantity"].to_numpy(),
            "issued": "",
            "week_ending": ex["week_ending"].to_numpy(),
            "reason": reasons[bad],
        },
        columns=list(EXCLUDED_COLUMNS),
    )
    if file_excluded:
        excluded = pd.concat([pd.DataFrame(file_excluded), excluded], ignore_index=True)
    keep = ~bad & ~identical_extra
    clean = pd.DataFrame(
        {
            "region": frame["region"].to_numpy()[keep],
            "quantity": frame["quantity"].to_numpy()[keep],
            "week_ending": week_ending.to_numpy()[keep],
            "value": vv[keep],
            "reported": reported.to_numpy()[keep],
        }
    )
    problems.extend(c.problems)
    return ValidatedObservations(
        table=clean.sort_values(
            ["region", "quantity", "week_ending", "reported"], kind="stable"
        ).reset_index(drop=True),
        excluded=excluded.reset_index(drop=True),
        problems=tuple(problems),
        has_vintages=has_vintages,
        files=tuple(r.label for r in files),
    )


def cross_check(
    forecasts: ValidatedForecasts, observations: ValidatedObservations
) -> list[Problem]:
    """Warn about regions or quantities that are forecast but never observed."""
    problems: list[Problem] = []
    f, o = forecasts.table, observations.table
    obs_file = ", ".join(observations.files) or "observations"
    for col in ("region", "quantity"):
        missing = sorted(set(f[col].unique()) - set(o[col].unique()))
        if missing:
            problems.append(
                Problem(
                    "warning",
                    "never-observed",
                    obs_file,
                    (),
                    "",
                    col,
                    tuple(missing),
                    f"forecasts name this {col} but the observations have none for it; "
                    "its forecasts cannot be scored",
                    f"add its observations, or check the spelling of the {col} in both files",
                )
            )
    return problems
