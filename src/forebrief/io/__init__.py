"""Reading and writing tables: the only place (with the renderers' writers) that opens files."""

from __future__ import annotations

from forebrief.io.tables import (
    RawFile,
    parse_column_map,
    read_raw_table,
    resolve_inputs,
    write_csv,
)

__all__ = ["RawFile", "parse_column_map", "read_raw_table", "resolve_inputs", "write_csv"]
