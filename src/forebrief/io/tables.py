"""Read forecast and observation files (CSV or Parquet, chosen by extension) and write tables.

Reading does no checking beyond "can this file be read at all": every row-level check lives in
:mod:`forebrief.tables.validate`, so that one bad row never costs the good ones. Text columns are read
as text so that a bad entry can be quoted back to the user exactly as it was written.
"""

from __future__ import annotations

import glob
import io
import os
import warnings
from collections.abc import Collection, Iterable, Mapping, Sequence
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from forebrief.errors import ConfigError, InputError
from forebrief.tables.raw import RawFile

__all__ = ["RawFile", "parse_column_map", "read_raw_table", "resolve_inputs", "write_csv"]

_TABLE_SUFFIXES = (".csv", ".csv.gz", ".parquet", ".pq")
#: Columns always read as text, so that an unparseable date is shown as written.
_TEXT_COLUMNS = ("model", "region", "quantity", "issued", "week_ending", "reported")
#: The type ``read_csv(dtype=str)`` gives a text column, and whether the parser gives text
#: columns that type by itself (pandas' string type; an object column may mix types).
_TEXT_DTYPE = pd.Series(["a"], dtype=str).dtype
_TEXT_INFERRED = isinstance(_TEXT_DTYPE, pd.StringDtype)


def parse_column_map(text: str | None) -> dict[str, str]:
    """Parse ``ours=theirs,ours2=theirs2`` into ``{theirs: ours}`` (the renaming to apply)."""
    if not text:
        return {}
    mapping: dict[str, str] = {}
    for part in text.split(","):
        part = part.strip()
        if not part:
            continue
        ours, sep, theirs = part.partition("=")
        if not sep or not ours.strip() or not theirs.strip():
            raise ConfigError(
                f"--columns entry {part!r} is not of the form ours=theirs; "
                "fix: write for example --columns value=quantile_value,level=probability"
            )
        mapping[theirs.strip()] = ours.strip()
    return mapping


def resolve_inputs(spec: str | os.PathLike[str] | Sequence[str | os.PathLike[str]]) -> list[Path]:
    """Expand a file, a folder (all tables below it) or a glob pattern into a sorted file list."""
    specs: Iterable[str | os.PathLike[str]]
    specs = [spec] if isinstance(spec, str | os.PathLike) else spec
    found: list[Path] = []
    for one in specs:
        text = os.fspath(one)
        path = Path(text)
        if any(ch in text for ch in "*?["):
            matches = sorted(Path(p) for p in glob.glob(text, recursive=True))
            tables = [p for p in matches if p.is_file() and _is_table(p)]
            if not tables:
                raise InputError(
                    f"{text}: no CSV or Parquet files match this pattern; "
                    "fix: check the folder and the pattern (for example submissions/**/*.csv)"
                )
            found.extend(tables)
        elif path.is_dir():
            tables = sorted(p for p in path.rglob("*") if p.is_file() and _is_table(p))
            if not tables:
                raise InputError(
                    f"{text}: this folder holds no .csv or .parquet files; "
                    "fix: point to the folder that holds the submission files"
                )
            found.extend(tables)
        elif path.is_file():
            found.append(path)
        else:
            raise InputError(f"{text}: no such file or folder; fix: check the path")
    return found


def _is_text(col: pd.Series | pd.DataFrame) -> bool:
    """True if a column as read holds text only, as ``dtype=str`` would have given it."""
    return isinstance(col, pd.Series) and col.dtype == _TEXT_DTYPE


def _read_csv_inferred(
    path: Path, text_cols: Collection[str], options: Mapping[str, Any]
) -> pd.DataFrame | None:
    """Read a CSV letting the parser find the text columns; None if any came back otherwise.

    Asking for text (``dtype=str``) costs more than letting the parser find it, so the caller
    reads again as text only when a text column came back as numbers, booleans, all empty
    or a mixture, or the parser warned (the second read then shows the warning as before).
    """
    if not _TEXT_INFERRED:
        return None
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        frame = pd.read_csv(path, **options)
    if caught or not all(_is_text(frame[c]) for c in text_cols):
        return None
    return frame


def _is_table(path: Path) -> bool:
    name = path.name.lower()
    return name.endswith(_TABLE_SUFFIXES) and not name.startswith((".", "~"))


def read_raw_table(path: Path, *, columns: Mapping[str, str] | None = None) -> RawFile:
    """Read one CSV or Parquet file by its extension; rename columns with ``{theirs: ours}``.

    Raises InputError only when the file cannot be read at all.
    """
    name = path.name.lower()
    label = str(path)
    try:
        if name.endswith((".parquet", ".pq")):
            frame = pd.read_parquet(path)
            first_row = 1
        elif name.endswith((".csv", ".csv.gz")):
            header = pd.read_csv(path, nrows=0)
            names = [columns.get(c, c) if columns else c for c in header.columns]
            text_cols = {
                orig: str
                for orig, ours in zip(header.columns, names, strict=True)
                if ours in _TEXT_COLUMNS
            }
            options: dict[str, Any] = {
                "keep_default_na": False,
                "na_values": [""],
                "skipinitialspace": True,
            }
            inferred = _read_csv_inferred(path, text_cols, options)
            frame = (
                inferred if inferred is not None else pd.read_csv(path, dtype=text_cols, **options)
            )
            first_row = 2
        else:
            raise InputError(
                f"{label}: unknown file type; fix: use a .csv or .parquet file (chosen by extension)"
            )
    except FileNotFoundError:
        raise InputError(f"{label}: no such file; fix: check the path") from None
    except InputError:
        raise
    except pd.errors.EmptyDataError:
        raise InputError(
            f"{label}: the file is empty; fix: export the table with its header row"
        ) from None
    except (pd.errors.ParserError, UnicodeDecodeError, ValueError, OSError) as exc:
        first = str(exc).strip().splitlines()[0] if str(exc).strip() else type(exc).__name__
        raise InputError(
            f"{label}: cannot be read as a table ({first}); "
            "fix: save it as comma-separated UTF-8 text with one header row, or as Parquet"
        ) from None
    renamed: dict[str, str] = {}
    if columns:
        renamed = {k: v for k, v in columns.items() if k in frame.columns}
        frame = frame.rename(columns=renamed)
    frame.columns = [str(c).strip() for c in frame.columns]
    twice = sorted({c for c in frame.columns if list(frame.columns).count(c) > 1})
    if twice:
        # two columns with one name cannot be told apart (for example 'value' and a column
        # mapped onto it with --columns); refuse the file rather than guess
        sources = {ours: theirs for theirs, ours in renamed.items()}
        shown = ", ".join(
            repr(c) + (f" (also mapped from {sources[c]!r} by --columns)" if c in sources else "")
            for c in twice
        )
        raise InputError(
            f"{label}: column {shown} appears more than once; "
            "fix: rename or remove one of them, or change the --columns mapping"
        )
    return RawFile(label=label, frame=frame, first_row=first_row, renamed=renamed)


def write_csv(frame: pd.DataFrame, path: Path, *, float_format: str = "%.10g") -> Path:
    """Write a table as UTF-8 CSV with '\\n' line endings and ISO dates (deterministic bytes)."""
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_bytes(csv_bytes(frame, float_format=float_format))
    return path


def csv_bytes(frame: pd.DataFrame, *, float_format: str = "%.10g") -> bytes:
    """A table as the exact bytes of its CSV file (UTF-8, '\\n' line endings, ISO dates).

    Dates and floats are turned into text here, once per distinct date and with one ``%``
    per number: the same text pandas writes with ``float_format`` (``float_format % value``,
    empty for NaN), at a tenth of the cost on large tables. O(cells).
    """
    out = frame.copy()
    for i in range(out.shape[1]):
        col = out.iloc[:, i]
        if pd.api.types.is_datetime64_any_dtype(col):
            out.isetitem(i, _date_text(col))
        elif float_format and isinstance(col.dtype, np.dtype) and col.dtype.kind == "f":
            out.isetitem(i, _float_text(col, float_format))
    buf = io.StringIO()
    out.to_csv(buf, index=False, lineterminator="\n", float_format=float_format)
    return buf.getvalue().encode("utf-8")


def _date_text(col: pd.Series) -> np.ndarray:
    """YYYY-MM-DD per row (NaT stays missing), formatting each distinct date once."""
    codes, uniques = pd.factorize(col)
    texts = pd.Series(uniques).dt.strftime("%Y-%m-%d").to_numpy(dtype=object)
    values = np.full(len(col), np.nan, dtype=object)
    ok = codes >= 0
    values[ok] = texts[codes[ok]]
    return values


def _float_text(col: pd.Series, float_format: str) -> np.ndarray:
    """``float_format % v`` per number, '' for NaN (pandas' default na_rep in to_csv)."""
    values = col.to_numpy()
    text = np.full(values.size, "", dtype=object)
    ok = ~np.isnan(values)
    text[ok] = [float_format % v for v in values[ok].tolist()]
    return text
