"""Write result tables to a folder (CSV, deterministic bytes)."""

from __future__ import annotations

from collections.abc import Mapping
from pathlib import Path

import pandas as pd

from forebrief.errors import InputError
from forebrief.io.tables import write_csv

__all__ = ["ensure_out_dir", "write_tables"]


def ensure_out_dir(path: Path) -> Path:
    """Create the output folder (and parents); a clear error if that is impossible."""
    try:
        path.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise InputError(f"{path}: cannot create the output folder ({exc.strerror}); "
                         "fix: choose a folder you can write to") from None
    if not path.is_dir():
        raise InputError(f"{path}: exists and is not a folder; fix: choose another --out")
    return path


def write_tables(tables: Mapping[str, pd.DataFrame], out_dir: Path) -> list[Path]:
    """Write each table as ``out_dir/<name>`` (names include the .csv suffix)."""
    ensure_out_dir(out_dir)
    return [write_csv(frame, out_dir / name) for name, frame in tables.items()]
