"""Glue between files and the pure computations: read, validate, and hand clean tables on.

The command line and the weekly run both call these, so that every entry point reads and
validates inputs the same way.
"""

from __future__ import annotations

import os
from collections.abc import Collection, Mapping, Sequence
from dataclasses import dataclass, replace
from pathlib import Path
from typing import TypeVar

import pandas as pd

from forebrief.errors import InputError
from forebrief.io.tables import RawFile, read_raw_table, resolve_inputs
from forebrief.tables.validate import (
    EXCLUDED_COLUMNS,
    CheckReport,
    Problem,
    ValidatedForecasts,
    ValidatedObservations,
    cross_check,
    validate_forecasts,
    validate_observations,
)

__all__ = ["Inputs", "load_forecasts", "load_inputs", "load_observations"]

PathSpec = str | os.PathLike[str] | Sequence[str | os.PathLike[str]]
_V = TypeVar("_V", ValidatedForecasts, ValidatedObservations)


@dataclass(frozen=True)
class Inputs:
    """Validated forecasts and observations, and every problem found in them."""

    forecasts: ValidatedForecasts
    observations: ValidatedObservations
    problems: tuple[Problem, ...]

    @property
    def excluded(self) -> pd.DataFrame:
        """Every quarantined forecast and observation, with its reason."""
        parts = [self.forecasts.excluded, self.observations.excluded]
        parts = [p for p in parts if not p.empty]
        if not parts:
            return self.forecasts.excluded
        return pd.concat(parts, ignore_index=True)

    def report(self) -> CheckReport:
        return CheckReport(self.problems, self.forecasts, self.observations)


def input_label(path: Path, label_root: Path | None) -> str:
    """How an input file is named in messages and in the record: relative to ``label_root``
    (the configuration's folder) when it lies below it, else the path as given."""
    if label_root is not None:
        try:
            return path.resolve().relative_to(label_root.resolve()).as_posix()
        except ValueError:
            pass
    return str(path)


def _read_all(
    spec: PathSpec,
    columns: Mapping[str, str] | None,
    kind: str,
    label_root: Path | None = None,
) -> tuple[list[RawFile], list[Problem], pd.DataFrame]:
    """Read every file of ``spec``; a file that cannot be read is reported and excluded.

    One team's broken file must not stop the others: it becomes an error ``Problem`` and an
    ``excluded`` row. Only when no file at all can be read is its ``InputError`` raised.
    """
    raws: list[RawFile] = []
    problems: list[Problem] = []
    excluded: list[dict[str, str]] = []
    first_error: InputError | None = None
    for path in resolve_inputs(spec):
        label = input_label(path, label_root)
        try:
            raw = read_raw_table(path, columns=columns)
            raws.append(raw if raw.label == label else replace(raw, label=label))
        except InputError as exc:
            first_error = first_error or exc
            exc = InputError(str(exc).replace(str(path), label, 1))
            text = str(exc).removeprefix(f"{label}: ")
            message, sep, fix = text.rpartition("; fix: ")
            if not sep:
                message, fix = text, "check the file"
            problems.append(
                Problem("error", "unreadable-file", label, (), "", "", (), message, fix)
            )
            excluded.append(
                {
                    "kind": kind,
                    "file": label,
                    "rows": "all",
                    "model": "",
                    "region": "",
                    "quantity": "",
                    "issued": "",
                    "week_ending": "",
                    "reason": message,
                }
            )
    if first_error is not None and not raws:
        raise first_error
    return raws, problems, pd.DataFrame(excluded, columns=list(EXCLUDED_COLUMNS))


def _with_unreadable(validated: _V, problems: list[Problem], excluded: pd.DataFrame) -> _V:
    if not problems:
        return validated
    parts = [p for p in (excluded, validated.excluded) if not p.empty]
    return replace(
        validated,
        problems=(*problems, *validated.problems),
        excluded=pd.concat(parts, ignore_index=True),
        files=(*(p.file for p in problems), *validated.files),
    )


def load_forecasts(
    spec: PathSpec,
    *,
    columns: Mapping[str, str] | None = None,
    signed: Collection[str] = (),
    label_root: Path | None = None,
) -> ValidatedForecasts:
    """Read every forecast file named by ``spec`` (files, folders, globs) and validate them."""
    raws, problems, excluded = _read_all(spec, columns, "forecast", label_root)
    return _with_unreadable(validate_forecasts(raws, signed=signed), problems, excluded)


def load_observations(
    spec: PathSpec,
    *,
    columns: Mapping[str, str] | None = None,
    signed: Collection[str] = (),
    as_of: pd.Timestamp | None = None,
    label_root: Path | None = None,
) -> ValidatedObservations:
    """Read and validate observation files (with optional ``reported`` vintages)."""
    raws, problems, excluded = _read_all(spec, columns, "observation", label_root)
    return _with_unreadable(
        validate_observations(raws, signed=signed, as_of=as_of), problems, excluded
    )


def load_inputs(
    forecasts: PathSpec,
    observations: PathSpec,
    *,
    columns: Mapping[str, str] | None = None,
    signed: Collection[str] = (),
    as_of: pd.Timestamp | None = None,
    label_root: Path | None = None,
) -> Inputs:
    """Read and validate both inputs, and cross-check them.

    With ``label_root`` files are named relative to it (the configuration's folder), so a
    record names its inputs the same way wherever the folder is later unpacked.
    """
    f = load_forecasts(forecasts, columns=columns, signed=signed, label_root=label_root)
    o = load_observations(
        observations, columns=columns, signed=signed, as_of=as_of, label_root=label_root
    )
    problems = (*f.problems, *o.problems, *cross_check(f, o))
    return Inputs(f, o, problems)
