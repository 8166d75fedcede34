"""The command line: a thin layer that parses arguments, calls the library and writes files.

Exit codes: 0 success; 1 an error in the inputs or the run (the message says which file, row
and value, and the fix); 2 a usage error (a bad flag or option value); 130 on Ctrl-C.
Only :class:`forebrief.errors.ForebriefError` is caught: anything else is a bug.
"""

from __future__ import annotations

import argparse
import json
import sys
from collections.abc import Callable, Iterator, Sequence
from contextlib import contextmanager
from pathlib import Path
from typing import Any

import pandas as pd

from forebrief.errors import ConfigError, ForebriefError
from forebrief.version import __version__

__all__ = ["main"]


# --------------------------------------------------------------------------------------------
# argument types


def _date(text: str) -> pd.Timestamp:
    try:
        return pd.Timestamp(pd.to_datetime(text, format="%Y-%m-%d"))
    except (ValueError, TypeError):
        raise argparse.ArgumentTypeError(
            f"{text!r} is not a date; write it as YYYY-MM-DD, for example 2026-11-30"
        ) from None


def _positive_int(text: str) -> int:
    try:
        value = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is not a whole number") from None
    if value < 1:
        raise argparse.ArgumentTypeError(f"must be at least 1; got {value}")
    return value


def _fraction(text: str) -> float:
    try:
        value = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is not a number") from None
    if not 0.0 <= value <= 1.0:
        raise argparse.ArgumentTypeError(f"must lie between 0 and 1; got {value:g}")
    return value


def _level(text: str) -> float:
    value = _fraction(text)
    if value in (0.0, 1.0):
        raise argparse.ArgumentTypeError(f"a level must lie strictly between 0 and 1; got {text}")
    return value


def _nonneg_float(text: str) -> float:
    try:
        value = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is not a number") from None
    if value < 0:
        raise argparse.ArgumentTypeError(f"must be >= 0; got {value:g}")
    return value


def _power(text: str) -> float:
    value = _fraction(text)
    if value == 0.0:
        raise argparse.ArgumentTypeError("the calibration power must lie in (0, 1]; got 0")
    return value


# --------------------------------------------------------------------------------------------
# output helpers


class _Console:
    """Data to stdout, messages and progress to stderr; quiet without a terminal."""

    def __init__(self, *, quiet: bool = False) -> None:
        from rich.console import Console

        self.out = Console(highlight=False, soft_wrap=True)
        self.err = Console(stderr=True, highlight=False, soft_wrap=True)
        self.quiet = quiet

    def say(self, text: str) -> None:
        if not self.quiet:
            self.err.print(text, markup=False)

    def problem_lines(self, lines: Sequence[str]) -> None:
        for line in lines:
            self.err.print(line, markup=False)

    @contextmanager
    def stages(self, total: int) -> Iterator[Callable[[str], None]]:
        """A progress display of named stages (shown on a terminal only)."""
        from rich.progress import BarColumn, Progress, TextColumn, TimeElapsedColumn

        progress = Progress(
            TextColumn("{task.description:<28}"),
            BarColumn(),
            TextColumn("{task.completed}/{task.total}"),
            TimeElapsedColumn(),
            console=self.err,
            transient=True,
            disable=self.quiet or not self.err.is_terminal,
        )
        with progress:
            task = progress.add_task("starting", total=total)
            state = {"started": False}

            def advance(name: str) -> None:
                if state["started"]:
                    progress.advance(task)
                state["started"] = True
                progress.update(task, description=name)

            yield advance
            progress.update(task, completed=total)


def _add_common(p: argparse.ArgumentParser) -> None:
    p.add_argument("-q", "--quiet", action="store_true", help="print only errors")


def _add_input_options(p: argparse.ArgumentParser) -> None:
    p.add_argument(
        "--columns",
        metavar="OURS=THEIRS,...",
        help="read files whose columns are named differently, e.g. value=quantile_value,level=prob",
    )
    p.add_argument(
        "--signed",
        metavar="QUANTITY",
        nargs="+",
        default=(),
        help="quantities that may be negative (all are counts, floored at 0, unless named here)",
    )


def _signed(args: argparse.Namespace) -> tuple[str, ...]:
    return tuple(getattr(args, "signed", ()) or ())


def _columns(args: argparse.Namespace) -> dict[str, str]:
    from forebrief.io.tables import parse_column_map

    return parse_column_map(getattr(args, "columns", None))


def _add_score_options(
    p: argparse.ArgumentParser, *, alpha_auto: bool = False, scale: bool = True
) -> None:
    from forebrief.tables.schema import CM_LEVELS

    g = p.add_argument_group("scoring")
    g.add_argument(
        "--window",
        type=_positive_int,
        default=12,
        metavar="W",
        help="weeks of past targets to score (default 12)",
    )
    if alpha_auto:
        g.add_argument(
            "--alpha",
            default="auto",
            metavar="A|auto",
            help="calibration cutoff for weights, or 'auto' to optimise it (default)",
        )
    else:
        g.add_argument(
            "--alpha",
            type=_fraction,
            default=0.05,
            metavar="A",
            help="calibration cutoff for performance weights (default 0.05)",
        )
    g.add_argument(
        "--baseline",
        metavar="NAME",
        default=None,
        help="model that relative WIS is measured against",
    )
    g.add_argument(
        "--levels",
        type=_level,
        nargs="+",
        default=list(CM_LEVELS),
        metavar="L",
        help="Classical Model levels (default 0.05 0.25 0.5 0.75 0.95)",
    )
    g.add_argument(
        "--overshoot",
        type=_nonneg_float,
        default=0.10,
        metavar="K",
        help="intrinsic-range overshoot (default 0.10)",
    )
    g.add_argument(
        "--background",
        choices=("uniform", "log"),
        default="uniform",
        help="information background measure (default uniform)",
    )
    if scale:
        g.add_argument(
            "--scale",
            choices=("natural", "log"),
            default="natural",
            help="score WIS on the natural scale or on ln(x + 1) (default natural)",
        )
    g.add_argument(
        "--power",
        type=_power,
        default=1.0,
        metavar="P",
        help="calibration power in (0, 1] (default 1)",
    )


def _settings(args: argparse.Namespace, **overrides: Any) -> Any:
    from forebrief.tables.scoring import ScoreSettings

    values = {
        "window": args.window,
        "alpha": args.alpha,
        "baseline": args.baseline,
        "levels": tuple(sorted(args.levels)),
        "overshoot": args.overshoot,
        "background": args.background,
        "scale": args.scale,
        "power": args.power,
    }
    values.update(overrides)
    return ScoreSettings(**values)


# --------------------------------------------------------------------------------------------
# commands


def _cmd_check(args: argparse.Namespace, con: _Console) -> int:
    from forebrief.app.workflow import load_forecasts, load_observations
    from forebrief.tables.validate import cross_check

    forecasts = load_forecasts(args.forecasts, columns=_columns(args), signed=_signed(args))
    problems = list(forecasts.problems)
    n_obs = 0
    if args.observations:
        obs = load_observations(
            args.observations, columns=_columns(args), signed=_signed(args), as_of=args.as_of
        )
        problems += [*obs.problems, *cross_check(forecasts, obs)]
        n_obs = len(obs.table)
    errors = [p for p in problems if p.severity == "error"]
    warnings = [p for p in problems if p.severity == "warning"]
    if args.json:
        payload = {
            "errors": len(errors),
            "warnings": len(warnings),
            "problems": [
                {
                    "severity": p.severity,
                    "check": p.check,
                    "file": p.file,
                    "rows": list(p.rows),
                    "model": p.model,
                    "column": p.column,
                    "values": list(p.values),
                    "message": p.message,
                    "fix": p.fix,
                    "line": p.line(),
                }
                for p in problems
            ],
        }
        con.out.print_json(json.dumps(payload))
    else:
        for p in problems:
            con.out.print(p.line(), markup=False)
    n_fc = len(forecasts.excluded)
    summary = (
        f"{len(errors)} error(s), {len(warnings)} warning(s); {len(forecasts.table)} forecast rows "
        f"usable, {n_fc} forecast(s) quarantined"
        + (f"; {n_obs} observation rows usable" if args.observations else "")
    )
    con.say(summary)
    return 1 if errors else 0


def _cmd_score(args: argparse.Namespace, con: _Console) -> int:
    from forebrief.app.workflow import load_inputs
    from forebrief.io.outputs import write_tables
    from forebrief.tables.scoring import score_forecasts

    settings = _settings(args)
    with con.stages(4) as stage:
        stage("reading and checking inputs")
        inputs = load_inputs(
            args.forecasts,
            args.observations,
            columns=_columns(args),
            signed=_signed(args),
            as_of=args.as_of,
        )
        stage("scoring")
        result = score_forecasts(
            inputs.forecasts.table, inputs.observations.table, as_of=args.as_of, settings=settings
        )
        stage("writing tables")
        paths = write_tables(
            {
                "scores_by_model.csv": result.by_model,
                "scores_by_model_region.csv": result.by_model_region,
                "scores_by_item.csv": result.by_item,
                "excluded.csv": inputs.excluded,
            },
            args.out,
        )
        stage("done")
    _report_problems(inputs.problems, con)
    _print_score_summary(result, con)
    for note in result.notes:
        con.say(f"note: {note}")
    con.say(f"wrote {len(paths)} tables to {args.out}")
    return 0 if not result.by_model.empty else 1


def _report_problems(
    problems: Sequence[Any],
    con: _Console,
    *,
    errors_mean: str = "their forecasts are quarantined and listed in excluded.csv",
) -> None:
    errors = [p for p in problems if p.severity == "error"]
    warnings = [p for p in problems if p.severity == "warning"]
    if errors:
        con.problem_lines([p.line() for p in errors])
    if warnings and not con.quiet:
        con.problem_lines([p.line() for p in warnings])
    if errors or warnings:
        con.say(f"{len(errors)} input error(s) ({errors_mean}), {len(warnings)} warning(s)")


def _print_score_summary(result: Any, con: _Console) -> None:
    if con.quiet or result.by_model.empty:
        return
    from rich.table import Table

    table = Table(
        title=f"Scores as of {result.as_of:%Y-%m-%d} (window {result.settings.window} weeks)",
        title_justify="left",
    )
    for col in (
        "quantity",
        "ahead",
        "models",
        "items",
        "pass cutoff",
        "highest weights",
        "best rel. WIS",
    ):
        table.add_column(col, justify="right" if col in ("ahead", "models", "items") else "left")
    for (q, h), part in result.by_model.groupby(["quantity", "horizon"], sort=True):
        # a named baseline has no weight (nan): it is the yardstick, not a candidate
        top = part.dropna(subset=["weight"]).sort_values("weight", ascending=False).head(3)
        weights = ", ".join(
            f"{m} {w:.2f}" for m, w in zip(top["model"], top["weight"], strict=True)
        )
        rel = part.dropna(subset=["relative_wis"]).sort_values("relative_wis")
        best = f"{rel.iloc[0]['model']} {rel.iloc[0]['relative_wis']:.2f}" if len(rel) else "-"
        table.add_row(
            str(q),
            f"{h} wk",
            str(len(part)),
            str(int(part["n_items"].max())),
            f"{int(part['passes_cutoff'].sum())} of {len(part)}",
            weights,
            best,
        )
    con.out.print(table)


def _ensemble_settings(args: argparse.Namespace) -> Any:
    from forebrief.tables.ensemble import EnsembleSettings

    alpha: Any = args.alpha
    if alpha != "auto":
        try:
            alpha = float(alpha)
        except ValueError:
            raise ConfigError(
                f"--alpha must be 'auto' or a number in [0, 1]; got {alpha!r}"
            ) from None
        if not 0.0 <= alpha <= 1.0:
            raise ConfigError(f"--alpha must be 'auto' or a number in [0, 1]; got {args.alpha}")
    return EnsembleSettings(
        window=args.window,
        alpha=alpha,
        min_items=args.min_items,
        baseline=args.baseline,
        include_baseline=args.include_baseline,
        levels=tuple(sorted(args.levels)),
        overshoot=args.overshoot,
        background=args.background,
        power=args.power,
        signed=_signed(args),
    )


def _cmd_baseline(args: argparse.Namespace, con: _Console) -> int:
    from forebrief.app.workflow import load_observations
    from forebrief.io.outputs import write_table
    from forebrief.tables.baseline import persistence_forecast
    from forebrief.tables.ensemble import known_on

    obs = load_observations(
        args.observations, columns=_columns(args), signed=_signed(args), as_of=args.issued
    )
    _report_problems(obs.problems, con)
    known = known_on(obs.table, args.issued)
    if known.empty:
        raise ConfigError(
            f"no observation is known before {args.issued:%Y-%m-%d}; "
            "fix: choose a later --issued date"
        )
    floors = sorted(set(known["quantity"]) - set(_signed(args)))
    table = persistence_forecast(
        known[["region", "quantity", "week_ending", "value"]],
        issued=args.issued,
        horizons=tuple(args.horizons),
        levels=tuple(sorted(set(args.levels))),
        changes_window=args.changes_window,
        name=args.name,
        nonnegative=floors,
    )
    path = write_table(table, args.out)
    n_series = table.groupby(["region", "quantity"]).ngroups
    con.say(
        f"wrote {len(table)} rows ({n_series} series x {len(args.horizons)} horizons) "
        f"of {args.name!r} to {path}"
    )
    return 0


def _cmd_nowcast(args: argparse.Namespace, con: _Console) -> int:
    from forebrief.app.workflow import load_observations
    from forebrief.io.outputs import write_table
    from forebrief.tables.nowcast import nowcast_table, settle_delay

    obs = load_observations(
        args.observations, columns=_columns(args), signed=_signed(args), as_of=args.as_of
    )
    _report_problems(obs.problems, con, errors_mean="those rows are left out")
    table = nowcast_table(obs.table, as_of=args.as_of, recent_weeks=args.recent_weeks)
    if table.empty:
        raise ConfigError(
            f"no observation is known before {args.as_of:%Y-%m-%d}; "
            "fix: choose a later --as-of date"
        )
    path = write_table(table, args.out)
    n_series = table.groupby(["region", "quantity"]).ngroups
    n_open = int((~table["complete"]).sum())
    settle = settle_delay(obs.table, as_of=args.as_of)
    vintages = "" if obs.has_vintages else " (the data have no vintages: every week is final)"
    con.say(
        f"wrote {len(table)} rows ({n_series} series, {n_open} provisional week(s)) to "
        f"{path}; values settle after about {settle} week(s){vintages}"
    )
    return 0


def _add_nowcast_command(sub: Any) -> None:
    p = sub.add_parser(
        "nowcast",
        help="estimate the complete counts of provisional weeks",
        description="From the vintages known on D, estimate what each recent "
        "week will reach once all late reports are in (chain ladder), with a "
        "90% range, and write one row per week.",
    )
    p.add_argument(
        "--observations",
        required=True,
        nargs="+",
        metavar="O",
        help="observation file(s), with their reported vintages",
    )
    p.add_argument(
        "--as-of",
        type=_date,
        required=True,
        metavar="D",
        help="use what was known on D (YYYY-MM-DD); weeks ending before D",
    )
    p.add_argument(
        "--recent-weeks",
        type=_positive_int,
        default=12,
        metavar="N",
        help="recent weeks behind the development factors and shown (default 12)",
    )
    p.add_argument(
        "--out", type=Path, required=True, metavar="FILE", help="output file (.csv or .parquet)"
    )
    _add_input_options(p)
    _add_common(p)
    p.set_defaults(func=_cmd_nowcast)


def _cmd_ensemble(args: argparse.Namespace, con: _Console) -> int:
    from forebrief.app.workflow import load_inputs
    from forebrief.io.outputs import write_json, write_tables
    from forebrief.tables.ensemble import build_ensemble

    settings = _ensemble_settings(args)
    with con.stages(3) as stage:
        stage("reading and checking inputs")
        inputs = load_inputs(
            args.forecasts,
            args.observations,
            columns=_columns(args),
            signed=_signed(args),
            as_of=args.issued,
        )
        stage("weights and pools")
        table = inputs.forecasts.table
        if settings.include_baseline and settings.baseline:
            from forebrief.tables.backtest import issue_dates_between
            from forebrief.tables.ensemble import with_baseline

            # the generated persistence forecast joins as a member, for every issue date so
            # that its record can be rated like any model's (built from data known then)
            dates = issue_dates_between(
                table, pd.Timestamp.min, args.issued, exclude={settings.baseline}
            )
            table, _generated = with_baseline(
                table,
                inputs.observations.table,
                issue_dates=dates,
                name=settings.baseline,
                signed=settings.signed,
            )
        result = build_ensemble(
            table, inputs.observations.table, issued=args.issued, settings=settings
        )
        stage("writing")
        write_tables(
            {
                "ensemble.csv": result.ensemble,
                "weights.csv": result.weights,
                "robustness.csv": result.robustness,
                "excluded.csv": inputs.excluded,
            },
            args.out,
        )
        write_json(result.summary, args.out / "ensemble_summary.json")
    _report_problems(inputs.problems, con)
    for note in result.notes:
        con.say(f"note: {note}")
    _print_weights(result, con)
    con.say(
        f"wrote ensemble.csv, weights.csv, robustness.csv, ensemble_summary.json and "
        f"excluded.csv to {args.out}"
    )
    return 0


def _print_weights(result: Any, con: _Console) -> None:
    if con.quiet:
        return
    from rich.table import Table

    table = Table(
        title=f"Weighted-pool weights, issued {result.issued:%Y-%m-%d}", title_justify="left"
    )
    for col in ("quantity", "ahead", "alpha", "weights (model weight)", "not yet rated"):
        table.add_column(col)
    for (q, h), part in result.weights.groupby(["quantity", "horizon"], sort=True):
        top = part.loc[part["weight"] > 0].sort_values("weight", ascending=False)
        weights = ", ".join(
            f"{m} {w:.2f}" for m, w in zip(top["model"], top["weight"], strict=True)
        )
        unrated = ", ".join(part.loc[~part["rated"], "model"]) or "-"
        table.add_row(str(q), f"{h} wk", f"{part['alpha'].iloc[0]:.3g}", weights, unrated)
    con.out.print(table)


def _cmd_backtest(args: argparse.Namespace, con: _Console) -> int:
    from forebrief.app.workflow import load_inputs
    from forebrief.io.outputs import write_tables
    from forebrief.tables.backtest import backtest

    settings = _ensemble_settings(args)
    inputs = load_inputs(
        args.forecasts, args.observations, columns=_columns(args), signed=_signed(args)
    )
    _report_problems(inputs.problems, con)
    from rich.progress import Progress

    with Progress(
        console=con.err, transient=True, disable=con.quiet or not con.err.is_terminal
    ) as bar:
        task = bar.add_task("back-testing issue dates", total=None)

        def advance(done: int, total: int) -> None:
            bar.update(task, completed=done, total=total)

        result = backtest(
            inputs.forecasts.table,
            inputs.observations.table,
            start=args.start,
            end=args.end,
            settings=settings,
            progress=advance,
        )
    write_tables(
        {
            "backtest_scores.csv": result.scores,
            "weights_history.csv": result.weights_history,
            "backtest_by_item.csv": result.by_item,
            "excluded.csv": inputs.excluded,
        },
        args.out,
    )
    for note in result.notes:
        if not con.quiet and "equal weights" not in note:
            con.say(f"note: {note}")
    _print_backtest(result, con)
    con.say(
        f"back-tested {len(result.issue_dates)} issue date(s), scored as of "
        f"{result.as_of:%Y-%m-%d}; wrote backtest_scores.csv, weights_history.csv, "
        f"backtest_by_item.csv and excluded.csv to {args.out}"
    )
    return 0


def _print_backtest(result: Any, con: _Console) -> None:
    if con.quiet:
        return
    from rich.table import Table

    s = result.scores
    show = s.loc[s["kind"].isin(["ensemble", "baseline"])]
    table = Table(
        title="Back-test: ensembles against the baseline (relative WIS < 1 is better)",
        title_justify="left",
    )
    for col in ("quantity", "ahead", "method", "items", "rel. WIS", "in 50%", "in 90%"):
        table.add_column(col)
    for row in show.itertuples(index=False):
        rel = "-" if pd.isna(row.relative_wis) else f"{row.relative_wis:.2f}"
        table.add_row(
            str(row.quantity),
            f"{row.horizon} wk",
            str(row.model),
            str(row.n_items),
            rel,
            f"{row.within_50:.0%}",
            f"{row.within_90:.0%}",
        )
    con.out.print(table)


def _add_pooling_commands(sub: Any) -> None:
    from forebrief.tables.schema import STANDARD_LEVELS

    p = sub.add_parser(
        "baseline",
        help="write the persistence ('same as last week') forecast",
        description="Quantile forecasts whose median is the last observation "
        "known on the issue date, with a spread from recent one-week changes.",
    )
    p.add_argument("--observations", required=True, nargs="+", metavar="O")
    p.add_argument(
        "--issued",
        type=_date,
        required=True,
        metavar="D",
        help="issue date; only data known on D is used",
    )
    p.add_argument("--name", default="persistence", help="model name (default persistence)")
    p.add_argument(
        "--horizons",
        type=_positive_int,
        nargs="+",
        default=[1, 2, 3, 4],
        metavar="H",
        help="weeks ahead (default 1 2 3 4)",
    )
    p.add_argument(
        "--changes-window",
        type=_positive_int,
        default=12,
        metavar="W",
        help="weeks of recent one-week changes behind the spread (default 12)",
    )
    p.add_argument(
        "--levels",
        type=_level,
        nargs="+",
        default=list(STANDARD_LEVELS),
        metavar="L",
        help="quantile levels; give the members' levels so the "
        "baseline is compared like for like (default the 23 standard levels)",
    )
    p.add_argument(
        "--out", type=Path, required=True, metavar="FILE", help="output file (.csv or .parquet)"
    )
    _add_input_options(p)
    _add_common(p)
    p.set_defaults(func=_cmd_baseline)

    for name, helptext in (
        (
            "ensemble",
            "pool the members issued on a date (weighted pool, equal pool, quantile median)",
        ),
        ("backtest", "rebuild the ensembles for past issue dates and score them"),
    ):
        p = sub.add_parser(
            name,
            help=helptext,
            description=helptext[0].upper()
            + helptext[1:]
            + ". Weights use only what was known on each issue date.",
        )
        p.add_argument("--forecasts", required=True, nargs="+", metavar="F")
        p.add_argument("--observations", required=True, nargs="+", metavar="O")
        if name == "ensemble":
            p.add_argument(
                "--issued",
                type=_date,
                required=True,
                metavar="D",
                help="issue date of the members to pool",
            )
        else:
            p.add_argument("--from", dest="start", type=_date, required=True, metavar="D1")
            p.add_argument("--to", dest="end", type=_date, required=True, metavar="D2")
        p.add_argument("--out", type=Path, required=True, metavar="DIR", help="output folder")
        _add_score_options(p, alpha_auto=True, scale=False)
        p.set_defaults(baseline="persistence")
        p.add_argument(
            "--min-items",
            type=int,
            default=6,
            metavar="N",
            help="scored items a member needs before it is rated (default 6)",
        )
        p.add_argument(
            "--include-baseline",
            action="store_true",
            help="let the baseline be an ensemble member too",
        )
        _add_input_options(p)
        _add_common(p)
        p.set_defaults(func=_cmd_ensemble if name == "ensemble" else _cmd_backtest)


def _brief_config(args: argparse.Namespace) -> Any:
    from forebrief.app.config import BriefingConfig, load_config

    cfg = load_config(args.config) if args.config else BriefingConfig()
    changes: dict[str, Any] = {}
    if args.forecasts:
        changes["forecasts"] = tuple(Path(p) for p in args.forecasts)
    if args.observations:
        changes["observations"] = tuple(Path(p) for p in args.observations)
    if args.archive:
        changes["archive"] = args.archive
    changes.update(_judgement_overrides(args))
    cfg = cfg.with_overrides(**changes)
    if not cfg.forecasts or not cfg.observations:
        raise ConfigError(
            "no forecasts or observations to read; fix: pass --config forebrief.toml, or "
            "--forecasts FILES_OR_FOLDER and --observations FILE"
        )
    return cfg


def _n_stages() -> int:
    from forebrief.app.weekly import STAGES

    return len(STAGES)


def _judgement_overrides(args: argparse.Namespace) -> dict[str, Any]:
    """--settle-weeks and --headline, checked as the configuration keys are."""
    from forebrief.app.config import check_headline, check_settle_weeks

    changes: dict[str, Any] = {}
    if getattr(args, "settle_weeks", None) is not None:
        changes["settle_weeks"] = check_settle_weeks(args.settle_weeks, key="--settle-weeks")
    if getattr(args, "headline", None) is not None:
        changes["headline"] = check_headline(args.headline, key="--headline")
    return changes


def _add_judgement_options(p: argparse.ArgumentParser) -> None:
    p.add_argument(
        "--settle-weeks",
        metavar="N|auto",
        help="score only target weeks at least N weeks old on the rating date "
        "('auto', the default, estimates N from the vintages; 0 scores every week)",
    )
    p.add_argument(
        "--headline",
        metavar="METHOD",
        help="combination for the headline: 'auto' (the median of the models unless "
        "another did clearly better in the back-test) or weighted_pool, equal_pool, "
        "quantile_median, recalibrated_pool",
    )


def _cmd_brief(args: argparse.Namespace, con: _Console) -> int:
    from forebrief.app.pipeline import record_briefing

    cfg = _brief_config(args)
    if args.revise and not (args.reason or "").strip():
        raise ConfigError('--revise needs --reason "..." saying why the record is revised')
    if args.reason and not args.revise:
        raise ConfigError("--reason is only used with --revise")
    with con.stages(_n_stages()) as stage:
        outcome = record_briefing(
            cfg, issued=args.issued, stage=stage, revise_reason=args.reason if args.revise else None
        )
    _report_problems(outcome.problems, con)
    record = outcome.record.path
    con.out.print(str(record), markup=False)
    con.say(f"briefing written: {record / 'briefing.txt'}")
    return 0


def _cmd_demo(args: argparse.Namespace, con: _Console) -> int:
    from forebrief.app.config import load_config
    from forebrief.demo import generate_scenario, write_scenario

    out: Path = args.out
    try:
        out.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise ConfigError(
            f"{out}: cannot create the demo folder ({exc.strerror}); fix: choose another --out"
        ) from None
    from forebrief.errors import ArchiveError
    from forebrief.record import list_records

    done = list_records(out / "archive")
    if done:
        raise ArchiveError(
            f"the demo already ran in {out}: its record is {done[-1].path}; nothing was "
            f"changed; fix: open that record, or run forebrief demo --out ANOTHER_FOLDER"
        )
    write_scenario(generate_scenario(), out)
    cfg = load_config(out / "forebrief.toml").with_overrides(
        archive=out / "archive", **_judgement_overrides(args)
    )
    con.say(f"demo inputs written to {out} (an invented scenario); running the weekly briefing")
    from forebrief.app.pipeline import record_briefing

    with con.stages(_n_stages()) as stage:
        outcome = record_briefing(cfg, issued=None, stage=stage)
    con.say(
        "The scenario includes one team's deliberately malformed file; the lines below "
        "show how forebrief reports it (only the faulty forecasts are set aside):"
    )
    _report_problems(outcome.problems, con)
    record = outcome.record.path
    con.out.print(str(record), markup=False)
    con.say(
        f"briefing written: open {record / 'briefing.pdf'} or {record / 'briefing.html'} "
        f"(plain text: briefing.txt); the weekly command is forebrief brief --config "
        f"{out / 'forebrief.toml'}"
    )
    return 0


def _add_weekly_commands(sub: Any) -> None:
    p = sub.add_parser(
        "brief",
        help="run the weekly briefing and write its dated record",
        description="Validate, score, pool, back-test and write the dated "
        "record ARCHIVE/<issue date>/ with the facts and the narrative.",
    )
    p.add_argument("--config", type=Path, metavar="FILE", help="forebrief.toml")
    p.add_argument(
        "--issued",
        type=_date,
        metavar="D",
        help="issue date (default: the latest in the forecasts)",
    )
    p.add_argument("--forecasts", nargs="+", metavar="F", help="override the config's forecasts")
    p.add_argument(
        "--observations", nargs="+", metavar="O", help="override the config's observations"
    )
    p.add_argument("--archive", type=Path, metavar="DIR", help="override the archive folder")
    p.add_argument(
        "--revise",
        action="store_true",
        help="write a new revision of an existing record (needs --reason)",
    )
    p.add_argument("--reason", metavar="TEXT", help="why the record is revised")
    _add_judgement_options(p)
    _add_common(p)
    p.set_defaults(func=_cmd_brief)

    p = sub.add_parser(
        "demo",
        help="run the weekly briefing on an invented scenario",
        description="Write the invented demo scenario (per-team submissions, "
        "observations with vintages, forebrief.toml) into DIR and run the "
        "weekly briefing there, with the archive at DIR/archive.",
    )
    p.add_argument(
        "--out",
        type=Path,
        default=Path("forebrief-demo"),
        metavar="DIR",
        help="folder for the demo (default ./forebrief-demo)",
    )
    _add_judgement_options(p)
    _add_common(p)
    p.set_defaults(func=_cmd_demo)


def _cmd_archive(args: argparse.Namespace, con: _Console) -> int:
    from forebrief import record as arc

    root: Path = args.archive
    if not root.is_dir():
        from forebrief.errors import ArchiveError

        raise ArchiveError(
            f"{root}: no such archive folder; fix: give the folder that holds "
            "the dated records (the [archive] folder of forebrief.toml)"
        )
    if args.action == "list":
        records = arc.list_records(root)
        if not records:
            con.say(f"{root}: no records yet")
            return 0

        titles = "; ".join(sorted({r.title for r in records}))
        lines = [
            f"Records in {root} ({titles})",
            f"{'record':<14} {'rev':>3} {'decisions':>9} {'sends':>5}  headline",
        ]
        for r in records:
            n_dec = len(arc.read_log(r.path, arc.DECISIONS))
            n_send = len(arc.read_log(r.path, arc.SENDS))
            note = f" [revised: {r.manifest.get('revision_reason')}]" if r.revision > 1 else ""
            head = r.headline.split(". ")[0] + note
            lines.append(f"{r.name:<14} {r.revision:>3} {n_dec:>9} {n_send:>5}  {head}")
        con.out.print("\n".join(lines), markup=False, overflow="ignore", crop=False)
        return 0
    if args.action == "show":
        r = arc.find_record(root, args.date)
        m = r.manifest
        lines = [
            f"record      {r.name}  (sequence {r.sequence} of the archive's chain)",
            f"issued      {r.issued}",
            f"title       {r.title}",
            f"created     {m.get('created')}  by forebrief {m.get('tool_version')}",
        ]
        if m.get("supersedes"):
            lines.append(
                f"revision    {r.revision}, supersedes {m['supersedes']}: "
                f"{m.get('revision_reason')}"
            )
        lines.append(f"headline    {r.headline}")
        lines.append(
            f"inputs      {len(m.get('inputs', []))} file(s), data as of "
            f"{m.get('decisions', {}).get('data_as_of')}"
        )
        for g in m.get("decisions", {}).get("alpha", []):
            lines.append(
                f"cutoff      {g['quantity']} {g['horizon']} wk ahead: "
                f"alpha {g['alpha']:.3g} ({g['how']})"
            )
        excluded = m.get("decisions", {}).get("excluded", [])
        lines.append(f"excluded    {len(excluded)} forecast(s)/observation(s) quarantined")
        lines.append(
            "files       "
            + ", ".join(sorted(o["path"] for o in m.get("outputs", []) if "/" not in o["path"]))
        )
        for e in arc.read_log(r.path, arc.DECISIONS):
            ref = f" [ref {e['ref']}]" if e.get("ref") else ""
            lines.append(f"decision {e['seq']}  {e['time']}  {e['by']}: {e['text']}{ref}")
        for e in arc.read_log(r.path, arc.SENDS):
            lines.append(
                f"sent {e['seq']}      {e['time']}  to {', '.join(e['recipients'])}: "
                f"{e.get('server_reply', '')}"
            )
        con.out.print("\n".join(lines), markup=False)
        return 0
    if args.action == "verify":
        report = arc.verify_archive(root, args.date)
        for w in report.warnings:
            con.err.print(f"warning: {w}", markup=False)
        for p in report.problems:
            con.out.print(f"FAILED: {p}", markup=False)
        if report.ok:
            con.say(
                f"verified {len(report.checked)} record(s): every file, the hash chain and "
                "the decision and send logs are intact"
            )
            return 0
        con.say(f"{len(report.problems)} problem(s) found in {root}")
        return 1
    if args.action == "reproduce":
        from forebrief.app.pipeline import reproduce_record

        rep = reproduce_record(root, args.date)
        for name in rep.different:
            con.out.print(f"DIFFERENT: {name}", markup=False)
        for name in rep.missing:
            con.out.print(f"MISSING: {name}", markup=False)
        if rep.ok:
            con.say(
                f"{rep.record}: reproduced from its archived inputs and configuration; all "
                f"{len(rep.identical)} outputs are identical"
            )
            return 0
        con.say(f"{rep.record}: {len(rep.different)} output(s) differ, {len(rep.missing)} missing")
        return 1
    if args.action == "reindex":
        path = arc.rebuild_index(root)
        con.say(f"rebuilt {path} from the record folders")
        return 0
    raise ConfigError(f"unknown archive action {args.action!r}")  # pragma: no cover


def _cmd_decide(args: argparse.Namespace, con: _Console) -> int:
    import datetime as dt

    from forebrief import record as arc

    for name, value in (("--text", args.text), ("--by", args.by)):
        if not value or not value.strip():
            raise ConfigError(
                f"{name} must not be empty; fix: say what was decided and who decided it"
            )
        if any(ch in value for ch in "\r\n\x00"):
            raise ConfigError(f"{name} must be one line; fix: remove the line breaks")
    record = arc.find_record(args.archive, args.date)
    entry = arc.append_log(
        args.archive,
        record,
        arc.DECISIONS,
        {
            "time": dt.datetime.now(dt.UTC).replace(microsecond=0).isoformat(),
            "by": args.by.strip(),
            "text": args.text.strip(),
            "ref": args.ref,
        },
    )
    con.say(f"decision {entry['seq']} recorded on {record.name} (hash {entry['hash'][:12]})")
    return 0


def _cmd_send(args: argparse.Namespace, con: _Console) -> int:
    import email as email_lib
    import email.policy
    import email.utils

    from forebrief import record as arc
    from forebrief.app.config import config_from_dict
    from forebrief.app.delivery import password_from_env_or_prompt, recipients_of, send_message
    from forebrief.errors import DeliveryError

    record_dir: Path = args.record.resolve()
    eml = record_dir / "briefing.eml"
    if not eml.is_file():
        raise DeliveryError(
            f"{eml}: no e-mail in this record; fix: give the folder of a record "
            "written by forebrief brief (ARCHIVE/YYYY-MM-DD)"
        )
    matches = [r for r in arc.list_records(record_dir.parent) if r.path.resolve() == record_dir]
    if not matches:
        raise DeliveryError(
            f"{record_dir}: not a complete record of an archive; fix: give a "
            "folder listed by forebrief archive list"
        )
    record = matches[0]
    cfg = config_from_dict(record.manifest.get("config", {}))
    mail = cfg.email
    data = eml.read_bytes()
    msg = email_lib.message_from_bytes(data, policy=email.policy.default)
    if args.to:
        bare = email_lib.message_from_string("\n", policy=email.policy.default)
        recipients = recipients_of(bare, extra=tuple(args.to))
    else:
        recipients = recipients_of(msg)
    if any(r.endswith(".invalid") for r in recipients):
        raise DeliveryError(
            "the record's e-mail has no real recipients (the configuration set "
            "none); fix: pass --to ADDRESS, or set [email] to in forebrief.toml "
            "for the next briefing"
        )
    sender = email.utils.parseaddr(str(msg.get("From", "")))[1]
    if not sender or sender.endswith(".invalid"):
        raise DeliveryError(
            "the record's e-mail has no real sender (the configuration set "
            "none); fix: set [email] from in forebrief.toml and revise the "
            "record with forebrief brief --revise --reason ..."
        )
    host = args.smtp_host or mail.smtp_host
    if not host:
        raise DeliveryError(
            "no SMTP server is set; fix: pass --smtp-host, or set [email] "
            "smtp_host in forebrief.toml"
        )
    port = args.smtp_port or mail.smtp_port
    security = "ssl" if args.ssl else "starttls" if args.starttls else mail.security
    user = args.user or mail.user or None
    password = password_from_env_or_prompt(mail.password_env, user=user)
    receipt = send_message(
        data,
        sender=sender,
        recipients=recipients,
        host=host,
        port=port,
        security=security,
        user=user,
        password=password,
    )
    arc.append_log(
        record_dir.parent,
        record,
        arc.SENDS,
        {
            "time": receipt.time,
            "recipients": list(receipt.recipients),
            "server_reply": receipt.server_reply,
            "host": receipt.host,
            "port": receipt.port,
        },
    )
    con.say(
        f"sent {record.name} to {', '.join(receipt.recipients)} via {host}:{port}: "
        f"{receipt.server_reply}"
    )
    return 0


def _add_archive_commands(sub: Any) -> None:
    p = sub.add_parser(
        "archive",
        help="list, show, verify or reproduce archived records",
        description="Work with the dated records of an archive folder.",
    )
    asub = p.add_subparsers(dest="action", metavar="ACTION")
    asub.required = True
    for action, helptext in (
        ("list", "date, title, headline, revisions and decisions of every record"),
        ("show", "one record: what it holds, how it was made, its decisions and sends"),
        (
            "verify",
            "recompute every hash, the chain of records and the logs; exit 1 if "
            "anything changed or is missing",
        ),
        (
            "reproduce",
            "rerun a record's analysis from its archived inputs and check every "
            "output is identical",
        ),
        ("reindex", "rebuild archive.sqlite from the record folders"),
    ):
        q = asub.add_parser(
            action, help=helptext, description=helptext[0].upper() + helptext[1:] + "."
        )
        q.add_argument("archive", type=Path, metavar="ARCHIVE", help="the archive folder")
        if action in ("show", "reproduce"):
            q.add_argument(
                "date", metavar="DATE", help="YYYY-MM-DD (latest revision) or YYYY-MM-DD-rN"
            )
        elif action == "verify":
            q.add_argument(
                "date",
                metavar="DATE",
                nargs="?",
                default=None,
                help="only this record (the chain is always checked)",
            )
        _add_common(q)
        q.set_defaults(func=_cmd_archive)

    p = sub.add_parser(
        "send",
        help="send a record's e-mail over SMTP",
        description="Send the record's briefing.eml over SMTP. The password "
        "comes from the environment variable named by [email] password_env "
        "(default FOREBRIEF_SMTP_PASSWORD) or a prompt, never from a file. "
        "A successful send is noted in the record's send log.",
    )
    p.add_argument("record", type=Path, metavar="RECORD_DIR", help="ARCHIVE/YYYY-MM-DD")
    p.add_argument(
        "--to",
        nargs="+",
        metavar="ADDR",
        help="send to these addresses instead of the message's To and Cc",
    )
    p.add_argument("--smtp-host", metavar="H")
    p.add_argument("--smtp-port", type=_positive_int, metavar="P")
    tls = p.add_mutually_exclusive_group()
    tls.add_argument("--starttls", action="store_true", help="upgrade the connection with STARTTLS")
    tls.add_argument("--ssl", action="store_true", help="connect over SSL/TLS from the start")
    p.add_argument("--user", metavar="U", help="SMTP login name")
    _add_common(p)
    p.set_defaults(func=_cmd_send)

    p = sub.add_parser(
        "decide",
        help="record a decision taken on a briefing",
        description="Append a decision to a record's hash-chained decision log "
        "(the briefing itself is never edited).",
    )
    p.add_argument("archive", type=Path, metavar="ARCHIVE", help="the archive folder")
    p.add_argument(
        "--date",
        required=True,
        metavar="D",
        help="the briefing's issue date (YYYY-MM-DD, or YYYY-MM-DD-rN)",
    )
    p.add_argument("--text", required=True, help="what was decided")
    p.add_argument("--by", required=True, help="who decided it")
    p.add_argument("--ref", default=None, help="a reference (minute, ticket, paper)")
    _add_common(p)
    p.set_defaults(func=_cmd_decide)


# --------------------------------------------------------------------------------------------
# parser


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="forebrief",
        description="Weekly briefings from probabilistic epidemic forecasts: check inputs, "
        "score models, pool them, and write the briefing.",
    )
    parser.add_argument("--version", action="version", version=f"forebrief {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    sub.required = True

    p = sub.add_parser(
        "check",
        help="validate forecast (and observation) files",
        description="Report every problem in the input files, one line each. "
        "Exit 0 when there are no errors (warnings allowed), 1 when there are.",
    )
    p.add_argument(
        "forecasts",
        nargs="+",
        metavar="FORECASTS",
        help="forecast files, folders of submission files, or glob patterns",
    )
    p.add_argument("--observations", nargs="+", metavar="OBS", help="observation file(s)")
    p.add_argument(
        "--as-of",
        type=_date,
        default=None,
        metavar="D",
        help="warn about observations dated after D (YYYY-MM-DD)",
    )
    p.add_argument("--json", action="store_true", help="print the problems as JSON")
    _add_input_options(p)
    _add_common(p)
    p.set_defaults(func=_cmd_check)

    p = sub.add_parser(
        "score",
        help="score every model's record as of a date",
        description="Score every model on the targets of the last W weeks "
        "observed as of D: Classical Model calibration, information, combined "
        "score and weights; WIS, coverage, point error and relative WIS.",
    )
    p.add_argument(
        "--forecasts",
        required=True,
        nargs="+",
        metavar="F",
        help="forecast files, folders or glob patterns",
    )
    p.add_argument(
        "--observations", required=True, nargs="+", metavar="O", help="observation file(s)"
    )
    p.add_argument(
        "--as-of",
        type=_date,
        required=True,
        metavar="D",
        help="score with what was observed on D (YYYY-MM-DD)",
    )
    p.add_argument("--out", type=Path, required=True, metavar="DIR", help="output folder")
    _add_score_options(p)
    _add_input_options(p)
    _add_common(p)
    p.set_defaults(func=_cmd_score)

    _add_pooling_commands(sub)
    _add_nowcast_command(sub)
    _add_weekly_commands(sub)
    _add_archive_commands(sub)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point of the ``forebrief`` console script."""
    parser = build_parser()
    args = parser.parse_args(argv)
    con = _Console(quiet=getattr(args, "quiet", False))
    try:
        code = int(args.func(args, con))
    except ConfigError as exc:
        con.err.print(f"forebrief {args.command}: error: {exc}", markup=False)
        return exc.exit_code
    except ForebriefError as exc:
        con.err.print(f"forebrief {args.command}: error: {exc}", markup=False)
        return exc.exit_code
    except KeyboardInterrupt:
        con.err.print("interrupted", markup=False)
        return 130
    return code


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
