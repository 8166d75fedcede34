"""Write result tables to a folder (CSV, deterministic bytes)."""

from __future__ import annotations

import json
import math
from collections.abc import Mapping
from pathlib import Path
from typing import Any

import pandas as pd

from forebrief.errors import InputError
from forebrief.io.tables import csv_bytes, write_csv

__all__ = [
    "csv_bytes",
    "ensure_out_dir",
    "json_bytes",
    "json_ready",
    "write_json",
    "write_table",
    "write_tables",
]


def ensure_out_dir(path: Path) -> Path:
    """Create the output folder (and parents); a clear error if that is impossible."""
    try:
        path.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise InputError(
            f"{path}: cannot create the output folder ({exc.strerror}); "
            "fix: choose a folder you can write to"
        ) from None
    if not path.is_dir():
        raise InputError(f"{path}: exists and is not a folder; fix: choose another --out")
    return path


def write_tables(tables: Mapping[str, pd.DataFrame], out_dir: Path) -> list[Path]:
    """Write each table as ``out_dir/<name>`` (names include the .csv suffix)."""
    ensure_out_dir(out_dir)
    return [write_csv(frame, out_dir / name) for name, frame in tables.items()]


def json_ready(value: Any) -> Any:
    """Plain JSON types: NaN becomes null, numpy scalars become numbers, dates ISO text."""
    import numpy as np
    import pandas as pd

    if isinstance(value, Mapping):
        return {str(k): json_ready(v) for k, v in value.items()}
    if isinstance(value, list | tuple | set | frozenset):
        return [json_ready(v) for v in value]
    if isinstance(value, np.ndarray):
        return [json_ready(v) for v in value.tolist()]
    if isinstance(value, pd.Timestamp):
        return None if pd.isna(value) else value.strftime("%Y-%m-%d")
    if isinstance(value, np.bool_):
        return bool(value)
    if isinstance(value, np.integer):
        return int(value)
    if isinstance(value, float | np.floating):
        f = float(value)
        return None if math.isnan(f) or math.isinf(f) else f
    return value


def write_json(payload: Any, path: Path) -> Path:
    """Write JSON deterministically (UTF-8, two-space indent, a final newline)."""
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_bytes(json_bytes(payload))
    return path


def write_table(frame: pd.DataFrame, path: Path) -> Path:
    """Write one table as CSV or Parquet, chosen by the file's extension."""
    name = path.name.lower()
    if path.exists() and path.is_dir():
        raise InputError(f"{path}: is a folder; fix: give a file name ending in .csv or .parquet")
    try:
        if name.endswith((".parquet", ".pq")):
            path.parent.mkdir(parents=True, exist_ok=True)
            frame.to_parquet(path, index=False)
            return path
        if name.endswith(".csv"):
            return write_csv(frame, path)
    except OSError as exc:
        raise InputError(
            f"{path}: cannot be written ({exc.strerror}); fix: choose a folder you can write to"
        ) from None
    raise InputError(f"{path}: unknown file type; fix: end the name in .csv or .parquet")


def json_bytes(payload: Any) -> bytes:
    """JSON exactly as :func:`write_json` writes it."""
    text = json.dumps(json_ready(payload), indent=2, ensure_ascii=False, allow_nan=False)
    return (text + "\n").encode("utf-8")
