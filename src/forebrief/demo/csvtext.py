"""Exact text of the demo's CSV files: fixed column order, fixed number formats, '\\n' endings.

Pure string building (no files), so the same tables always give the same bytes. O(rows).
"""

from __future__ import annotations

import pandas as pd

from forebrief.tables.schema import FORECAST_COLUMNS

__all__ = [
    "OBSERVATION_FILE_COLUMNS",
    "forecast_csv_lines",
    "forecast_csv_text",
    "forecast_csv_texts",
    "level_text",
    "observations_csv_text",
]

#: Columns of the demo observation file (all vintages, so ``reported`` is always present).
OBSERVATION_FILE_COLUMNS: tuple[str, ...] = (
    "region",
    "quantity",
    "week_ending",
    "value",
    "reported",
)


def level_text(level: float) -> str:
    """Shortest decimal text of a quantile level, e.g. 0.025 -> '0.025', 0.5 -> '0.5'."""
    text = f"{level:.3f}".rstrip("0")
    return text if not text.endswith(".") else text + "0"


def _iso(column: pd.Series) -> list[str]:
    return pd.Series(column).dt.strftime("%Y-%m-%d").tolist()


def forecast_csv_lines(table: pd.DataFrame) -> list[str]:
    """Body lines (no header, no line ending) of a forecast table in its current row order.

    Values are written with one decimal; dates as ISO dates. O(rows).
    """
    level_names = {x: level_text(x) for x in set(table["level"].tolist())}
    columns = (
        table["model"].tolist(),
        table["region"].tolist(),
        table["quantity"].tolist(),
        _iso(table["issued"]),
        _iso(table["week_ending"]),
        [level_names[x] for x in table["level"].tolist()],
        [f"{x:.1f}" for x in table["value"].tolist()],
    )
    return [",".join(row) for row in zip(*columns, strict=True)]


def forecast_csv_text(table: pd.DataFrame) -> str:
    """Whole text of a forecast file: header plus one line per quantile, '\\n' endings."""
    return "\n".join([",".join(FORECAST_COLUMNS), *forecast_csv_lines(table)]) + "\n"


def forecast_csv_texts(table: pd.DataFrame) -> dict[tuple[str, str], str]:
    """Texts of one forecast file per (model, issued ISO date), rows in the table's order.

    Formats the whole table once, then cuts it per file; O(rows).
    """
    lines = forecast_csv_lines(table)
    keys = list(zip(table["model"].tolist(), _iso(table["issued"]), strict=True))
    header = ",".join(FORECAST_COLUMNS)
    grouped: dict[tuple[str, str], list[str]] = {}
    for key, line in zip(keys, lines, strict=True):
        grouped.setdefault(key, [header]).append(line)
    return {key: "\n".join(body) + "\n" for key, body in grouped.items()}


def observations_csv_text(table: pd.DataFrame) -> str:
    """Whole text of an observation file (integer counts, ISO dates), '\\n' endings. O(rows)."""
    columns = (
        table["region"].tolist(),
        table["quantity"].tolist(),
        _iso(table["week_ending"]),
        [str(int(v)) for v in table["value"].tolist()],
        _iso(table["reported"]),
    )
    body = [",".join(row) for row in zip(*columns, strict=True)]
    return "\n".join([",".join(OBSERVATION_FILE_COLUMNS), *body]) + "\n"
