"""One input file as read, before validation."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field

import pandas as pd

__all__ = ["RawFile"]


@dataclass(frozen=True)
class RawFile:
    """One input file as read: columns renamed to forebrief's names, nothing else changed.

    ``first_row`` is the row number of the first data row as a reader sees the file: 2 for CSV
    (the header is row 1, as a spreadsheet shows it), 1 for Parquet.
    """

    label: str
    frame: pd.DataFrame
    first_row: int
    renamed: Mapping[str, str] = field(default_factory=dict)
