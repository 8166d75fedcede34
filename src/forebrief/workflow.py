"""Glue between files and the pure computations: read, validate, and hand clean tables on.

The command line and the weekly run both call these, so that every entry point reads and
validates inputs the same way.
"""

from __future__ import annotations

import os
from collections.abc import Collection, Mapping, Sequence
from dataclasses import dataclass

import pandas as pd

from forebrief.io.tables import read_raw_table, resolve_inputs
from forebrief.validate import (
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


def load_forecasts(spec: PathSpec, *, columns: Mapping[str, str] | None = None,
                   signed: Collection[str] = ()) -> ValidatedForecasts:
    """Read every forecast file named by ``spec`` (files, folders, globs) and validate them."""
    raws = [read_raw_table(p, columns=columns) for p in resolve_inputs(spec)]
    return validate_forecasts(raws, signed=signed)


def load_observations(spec: PathSpec, *, columns: Mapping[str, str] | None = None,
                      signed: Collection[str] = (),
                      as_of: pd.Timestamp | None = None) -> ValidatedObservations:
    """Read and validate observation files (with optional ``reported`` vintages)."""
    raws = [read_raw_table(p, columns=columns) for p in resolve_inputs(spec)]
    return validate_observations(raws, signed=signed, as_of=as_of)


def load_inputs(forecasts: PathSpec, observations: PathSpec, *,
                columns: Mapping[str, str] | None = None,
                signed: Collection[str] = (),
                as_of: pd.Timestamp | None = None) -> Inputs:
    """Read and validate both inputs, and cross-check them."""
    f = load_forecasts(forecasts, columns=columns, signed=signed)
    o = load_observations(observations, columns=columns, signed=signed, as_of=as_of)
    problems = (*f.problems, *o.problems, *cross_check(f, o))
    return Inputs(f, o, problems)
