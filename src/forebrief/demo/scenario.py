"""The invented demo scenario: a wave in an invented jurisdiction, its reporting, and its forecasters.

Everything here is made up: the Commonwealth of Kestrelmark, its six regions, the Emberwake Day
holiday, the illness wave and the eight modelling teams. Any likeness to a real place, agency,
team or outbreak is accidental.

The scenario is built in four steps, all from one seed and without touching any file:

1. **Truth.** A daily discrete-time SEIR model per region (different transmission strength,
   seeding day and size, a little coupling through a shared mixing term) gives infections;
   admissions are a fraction of infections after a gamma-shaped delay, deaths a fraction of
   admissions after a further delay; weekly sums get negative-binomial noise. The
   whole-jurisdiction series is the sum of the regions' true counts.
2. **Reporting.** Each week is first published on the Monday after it ends at 75-90 % of its
   true count (50-62 % in the holiday week), then revised upwards over the next 1-3 Mondays
   until complete. Every published value is kept as a vintage.
3. **Forecasts.** On every issue Monday each team sees only what had been published by then,
   fits its own crude log-linear growth rate to the last few weeks, damps it, and turns it
   into log-normal quantiles. The teams differ only in honest ways: a nowcast correction for
   incomplete recent weeks or not, window length, damping, spread multiplier, bias, lag.
4. **Faults.** One team's file in one week is written with several faults (a value as text,
   crossing quantiles, a duplicated row, a missing level); its other weeks are clean.

Cost: about 250 days x 6 regions for the epidemic and 8 teams x 18 weeks x 14 series small
projections; well under a second.
"""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass, field
from statistics import NormalDist
from typing import Any

import numpy as np
import pandas as pd

from forebrief.demo.csvtext import forecast_csv_lines, level_text
from forebrief.schema import FORECAST_COLUMNS

__all__ = [
    "DEFAULT_SEED",
    "HORIZONS",
    "LEVELS",
    "QUANTITIES",
    "REGIONS",
    "TEAMS",
    "TOTAL_REGION",
    "RegionSpec",
    "Scenario",
    "TeamSpec",
    "generate_scenario",
]

DEFAULT_SEED = 20261130

#: Latest observed week (a Saturday) and the final issue date (the Monday after it).
LAST_WEEK_ENDING = dt.date(2026, 11, 28)
LAST_ISSUED = dt.date(2026, 11, 30)
N_SEASON_WEEKS = 36
N_ISSUES = 18
#: Days simulated before the first season week, so the first weeks already have cases.
_LEAD_IN_DAYS = 35

#: Levels every team submits; they include the Classical Model levels 0.05, 0.25, 0.5, 0.75, 0.95.
LEVELS: tuple[float, ...] = (0.025, 0.05, 0.1, 0.25, 0.5, 0.75, 0.9, 0.95, 0.975)
HORIZONS: tuple[int, ...] = (1, 2, 3, 4)
QUANTITIES: tuple[str, ...] = ("admissions", "deaths")

JURISDICTION_NAME = "Commonwealth of Kestrelmark"
HOLIDAY_NAME = "Emberwake Day"
#: A Friday; the week ending the next day is reported low at first.
HOLIDAY_DATE = dt.date(2026, 10, 9)


@dataclass(frozen=True)
class RegionSpec:
    """An invented region: id (lowercase, hyphens), display name, population."""

    id: str
    name: str
    population: int


REGIONS: tuple[RegionSpec, ...] = (
    RegionSpec("brindlecoast", "Brindlecoast", 1_240_000),
    RegionSpec("cobaltine-hills", "Cobaltine Hills", 860_000),
    RegionSpec("duskwater", "Duskwater Basin", 2_110_000),
    RegionSpec("fernquill", "Fernquill", 540_000),
    RegionSpec("glimmerfen", "Glimmerfen", 1_470_000),
    RegionSpec("velvetmoss", "Velvetmoss", 690_000),
)
TOTAL_REGION = RegionSpec(
    "kestrelmark", "Kestrelmark (all regions)", sum(r.population for r in REGIONS)
)

_QUANTITY_META: tuple[dict[str, str], ...] = (
    {"id": "admissions", "name": "Hospital Admissions", "unit": "admissions per week"},
    {"id": "deaths", "name": "Deaths", "unit": "deaths per week"},
)


@dataclass(frozen=True)
class TeamSpec:
    """An invented modelling team and the habits of its forecaster.

    window: weeks used to fit the growth rate; damping: growth kept per week ahead (0-1);
    spread: multiplier on the honest log-scale spread; bias: added to the log median;
    lag: latest published weeks ignored; nowcast: inflate the two newest weeks by the
    completeness seen in older first reports; jitter: sd of the team's own model error (log);
    first_issue: index of its first issue week (0 = first of the 18); skips: issue weeks missed;
    malformed: one of its files is written with faults.
    """

    id: str
    name: str
    description: str
    behaviour: str
    window: int = 4
    damping: float = 0.85
    spread: float = 1.0
    bias: float = 0.0
    lag: int = 0
    nowcast: bool = True
    jitter: float = 0.05
    first_issue: int = 0
    skips: int = 0
    malformed: bool = False


TEAMS: tuple[TeamSpec, ...] = (
    TeamSpec(
        "copperfinch",
        "Copper Finch Modelling Group",
        "Growth-rate projection with a correction for late reports; keeps its uncertainty honest.",
        "well calibrated",
        window=4,
        damping=0.6,
    ),
    TeamSpec(
        "glassheron",
        "Glass Heron Analytics",
        "Sharp short-term projections that rarely admit how uncertain they are.",
        "overconfident (intervals too narrow)",
        window=3,
        damping=0.9,
        spread=0.4,
    ),
    TeamSpec(
        "mothlight",
        "Mothlight Research Unit",
        "Cautious projections with very wide ranges.",
        "underconfident (intervals too wide)",
        window=5,
        spread=2.2,
    ),
    TeamSpec(
        "amberkite",
        "Amber Kite Consultancy",
        "Projections that lean towards the worst case.",
        "biased high",
        damping=0.6,
        bias=0.22,
    ),
    TeamSpec(
        "driftotter",
        "Drift Otter Collective",
        "Smooths over a long window and waits for a trend to settle before following it.",
        "lags the trend (biased low while rising)",
        window=7,
        damping=0.6,
        lag=1,
        nowcast=False,
        spread=1.1,
    ),
    TeamSpec(
        "pebblewren",
        "Pebble Wren Lab",
        "A small volunteer team that submits when it can.",
        "skips some weeks",
        window=4,
        damping=0.7,
        spread=1.1,
        jitter=0.1,
        skips=4,
    ),
    TeamSpec(
        "freshsprout",
        "Fresh Sprout Forecasting",
        "A new team that joined the collection in the last weeks of the season.",
        "new entrant without history",
        window=4,
        spread=1.0,
        first_issue=N_ISSUES - 3,
    ),
    TeamSpec(
        "inkbadger",
        "Ink Badger Institute",
        "Solid projections, but its submission pipeline once sent a broken file.",
        "one malformed file",
        window=5,
        spread=1.05,
        jitter=0.06,
        malformed=True,
    ),
)


@dataclass(frozen=True)
class Scenario:
    """The whole invented scenario, as tables and strings (nothing written yet).

    truth: region, quantity, week_ending, value - final true weekly counts, all season weeks.
    observations: region, quantity, week_ending, value, reported - every published vintage.
    submissions: the clean forecast files, long format (FORECAST_COLUMNS), one file per
        (model, issued); sorted by model, issued, region, quantity, week_ending, level.
    malformed: {(model, issued ISO date): exact file text} of the files written with faults.
    meta: plain dict for scenario.json.
    """

    seed: int
    truth: pd.DataFrame
    observations: pd.DataFrame
    submissions: pd.DataFrame
    malformed: dict[tuple[str, str], str] = field(default_factory=dict)
    meta: dict[str, Any] = field(default_factory=dict)


# ---------------------------------------------------------------------------------------------
# dates


def _week_endings() -> list[dt.date]:
    return [
        LAST_WEEK_ENDING - dt.timedelta(weeks=N_SEASON_WEEKS - 1 - i) for i in range(N_SEASON_WEEKS)
    ]


def _issue_week_index(i: int) -> int:
    """Index of the last week visible on issue date i (0..N_ISSUES-1)."""
    return N_SEASON_WEEKS - N_ISSUES + i


def _issue_dates() -> list[dt.date]:
    return [LAST_ISSUED - dt.timedelta(weeks=N_ISSUES - 1 - i) for i in range(N_ISSUES)]


# ---------------------------------------------------------------------------------------------
# step 1: the wave


def _delay_pmf(shape: float, scale: float, days: int = 31) -> np.ndarray:
    x = np.arange(days) + 0.5
    w = x ** (shape - 1.0) * np.exp(-x / scale)
    return w / w.sum()


def _simulate_truth(rng: np.random.Generator) -> tuple[np.ndarray, dict[str, Any]]:
    """True weekly counts, shape (quantity, region, week); regions without the total."""
    n_reg = len(REGIONS)
    pop = np.array([r.population for r in REGIONS], dtype=float)
    r0 = rng.uniform(1.30, 1.46, n_reg)
    seed_day = rng.integers(0, 80, n_reg)
    seed_size = rng.uniform(2.0, 25.0, n_reg) * pop / 1e6
    p_hosp = rng.uniform(0.0035, 0.0065, n_reg)
    p_death = rng.uniform(0.09, 0.15, n_reg)
    coupling = 0.006
    sigma, gamma = 1.0 / 3.0, 1.0 / 5.0
    beta = r0 * gamma

    n_days = _LEAD_IN_DAYS + 7 * N_SEASON_WEEKS
    s, e, i = pop.copy(), np.zeros(n_reg), np.zeros(n_reg)
    infections = np.zeros((n_days, n_reg))
    for day in range(n_days):
        seeded = np.where(seed_day == day, np.minimum(seed_size, s), 0.0)
        s, e = s - seeded, e + seeded
        mixing = (1.0 - coupling) * i / pop + coupling * i.sum() / pop.sum()
        new_inf = s * (1.0 - np.exp(-beta * mixing))
        new_inc = e * (1.0 - np.exp(-sigma))
        new_rec = i * (1.0 - np.exp(-gamma))
        s, e, i = s - new_inf, e + new_inf - new_inc, i + new_inc - new_rec
        infections[day] = new_inf

    to_admission = _delay_pmf(4.0, 2.25)  # mean about 9 days
    to_death = _delay_pmf(3.0, 2.7)  # mean about 8 days
    adm_daily = np.stack(
        [np.convolve(infections[:, k], to_admission)[:n_days] * p_hosp[k] for k in range(n_reg)],
        axis=1,
    )
    death_daily = np.stack(
        [np.convolve(adm_daily[:, k], to_death)[:n_days] * p_death[k] for k in range(n_reg)],
        axis=1,
    )

    def weekly(daily: np.ndarray) -> np.ndarray:
        season = daily[_LEAD_IN_DAYS:]
        return season.reshape(N_SEASON_WEEKS, 7, n_reg).sum(axis=1).T  # (region, week)

    def noisy(mean: np.ndarray, size: float) -> np.ndarray:
        return rng.negative_binomial(size, size / (size + mean)).astype(np.int64)

    truth = np.stack([noisy(weekly(adm_daily), 150.0), noisy(weekly(death_daily), 200.0)])
    params = {
        "r0": r0.round(3).tolist(),
        "seed_day": seed_day.tolist(),  # days after the simulation start
        "p_hosp": p_hosp.round(5).tolist(),
    }
    return truth, params


# ---------------------------------------------------------------------------------------------
# step 2: reporting


def _simulate_reporting(
    truth: np.ndarray, holiday_week: int, rng: np.random.Generator
) -> tuple[np.ndarray, np.ndarray]:
    """Vintages (quantity, region, week, 4) and number of revisions (quantity, region, week).

    Vintage j is published on the Monday j weeks after the week's first report; from vintage
    ``n_rev`` on it equals the truth.
    """
    shape = truth.shape
    first = rng.uniform(0.75, 0.90, shape)
    first[:, :, holiday_week] = rng.uniform(0.50, 0.62, shape[:2])
    n_rev = rng.choice(np.array([1, 2, 3]), size=shape, p=[0.35, 0.40, 0.25])
    n_rev[:, :, holiday_week] = rng.choice(np.array([2, 3]), size=shape[:2])
    steps = np.sort(rng.uniform(0.35, 0.95, (*shape, 2)), axis=-1)
    frac = np.ones((*shape, 4))
    frac[..., 0] = first
    for j in (1, 2):
        frac[..., j] = np.where(j < n_rev, first + (1.0 - first) * steps[..., j - 1], 1.0)
    vintages = np.floor(truth[..., None] * frac).astype(np.int64)
    vintages[frac >= 1.0] = np.broadcast_to(truth[..., None], frac.shape)[frac >= 1.0]
    return vintages, n_rev


# ---------------------------------------------------------------------------------------------
# step 3: the teams' forecasts

_Z = np.array([NormalDist().inv_cdf(p) for p in LEVELS])
#: Honest log-scale spread: a level term and a growth-rate term per week ahead (tuned so the
#: well-calibrated team covers close to the nominal share of outcomes in this scenario).
_SPREAD_LEVEL = 0.18
_SPREAD_GROWTH = 0.12


def _completeness(seen: np.ndarray, first_reports: np.ndarray, t: int, j: int) -> float:
    """Share of a week's count present j weeks after its first report, judged from weeks that
    have since settled (all of it public on the issue date)."""
    weeks = np.arange(max(0, t - 12), t - 3)
    now = seen[weeks].sum()
    then = first_reports[weeks, j].sum()
    return float(then / now) if now > 0 and then > 0 else 1.0


def _project(
    seen: np.ndarray, vintages: np.ndarray, t: int, team: TeamSpec, jitter: float
) -> np.ndarray:
    """Quantiles (horizon, level) from the series as published on the issue date.

    ``seen``: published values of weeks 0..t; ``vintages``: (week, 4) vintages of the series.
    """
    y = seen.astype(float)
    if team.nowcast:
        y[t] /= _completeness(seen, vintages, t, 0)
        y[t - 1] /= _completeness(seen, vintages, t, 1)
    if team.lag:
        y = y[: len(y) - team.lag]
    seg = np.log1p(y[-team.window :])
    x = np.arange(team.window) - (team.window - 1) / 2.0
    slope = float(np.clip((x * (seg - seg.mean())).sum() / (x * x).sum(), -0.45, 0.45))
    fitted_last = seg.mean() + slope * x[-1]
    anchor = 0.5 * fitted_last + 0.5 * seg[-1]
    steps = np.array(HORIZONS, dtype=float) + team.lag
    kept = np.cumsum(team.damping ** np.arange(1, int(steps[-1]) + 1))
    growth = slope * kept[steps.astype(int) - 1]
    log_median = anchor + growth + team.bias + jitter
    sd = team.spread * np.sqrt(
        _SPREAD_LEVEL**2 + (_SPREAD_GROWTH * steps) ** 2 + 1.0 / (np.expm1(log_median) + 1.0)
    )
    q = np.expm1(log_median[:, None] + sd[:, None] * _Z[None, :])
    return np.round(np.maximum(q, 0.0), 1) + 0.0  # + 0.0 turns -0.0 into 0.0


def _issue_plan(team: TeamSpec, rng: np.random.Generator) -> list[int]:
    issues = list(range(team.first_issue, N_ISSUES))
    if team.skips:
        candidates = [i for i in issues if 0 < i < N_ISSUES - 1]
        skipped = set(rng.choice(candidates, size=team.skips, replace=False).tolist())
        issues = [i for i in issues if i not in skipped]
    return issues


# ---------------------------------------------------------------------------------------------
# step 4: a malformed file


def _malformed_text(clean: pd.DataFrame, rng: np.random.Generator) -> tuple[str, list[dict]]:
    """File text of ``clean`` (one model, one issue date) with four faults in four forecasts."""
    lines = forecast_csv_lines(clean)
    regions = [r.id for r in REGIONS]
    picked = [regions[k] for k in rng.permutation(len(regions))[:4]]
    weeks = sorted(clean["week_ending"].unique())
    key = list(
        zip(
            clean["region"].tolist(),
            clean["quantity"].tolist(),
            clean["week_ending"].tolist(),
            clean["level"].tolist(),
            strict=True,
        )
    )
    row_of = {k: n for n, k in enumerate(key)}

    def row(region: str, quantity: str, horizon: int, level: float) -> int:
        return row_of[(region, quantity, weeks[horizon - 1], level)]

    faults: list[dict[str, Any]] = []
    # a value written as a word
    n = row(picked[0], "admissions", 2, 0.1)
    parts = lines[n].split(",")
    lines[n] = ",".join([*parts[:-1], "twelve"])
    text_row = n
    # two crossing quantiles: the 0.25 and 0.9 values swapped
    a, b = row(picked[1], "admissions", 3, 0.25), row(picked[1], "admissions", 3, 0.9)
    pa, pb = lines[a].split(","), lines[b].split(",")
    lines[a] = ",".join([*pa[:-1], pb[-1]])
    lines[b] = ",".join([*pb[:-1], pa[-1]])
    cross_rows = (a, b)
    # a duplicated row and a missing level (handled below so line numbers stay right)
    dup_row = row(picked[2], "deaths", 1, 0.5)
    missing_row = row(picked[3], "deaths", 4, 0.95)

    out: list[str] = []
    line_no: dict[int, int] = {}
    for n, text in enumerate(lines):
        if n == missing_row:
            continue
        out.append(text)
        line_no[n] = len(out) + 1  # 1-based, the header is line 1
        if n == dup_row:
            out.append(text)

    def where(region: str, quantity: str, horizon: int) -> dict[str, Any]:
        return {
            "region": region,
            "quantity": quantity,
            "week_ending": f"{weeks[horizon - 1]:%Y-%m-%d}",
            "horizon": horizon,
        }

    faults.append(
        {"fault": "value is text", **where(picked[0], "admissions", 2), "level": 0.1,
         "lines": [line_no[text_row]], "value": "twelve"}
    )  # fmt: skip
    faults.append(
        {"fault": "crossing quantiles", **where(picked[1], "admissions", 3),
         "level": [0.25, 0.9], "lines": [line_no[cross_rows[0]], line_no[cross_rows[1]]]}
    )  # fmt: skip
    faults.append(
        {"fault": "duplicated row", **where(picked[2], "deaths", 1), "level": 0.5,
         "lines": [line_no[dup_row], line_no[dup_row] + 1]}
    )  # fmt: skip
    faults.append(
        {"fault": "missing level", **where(picked[3], "deaths", 4), "level": 0.95, "lines": []}
    )
    header = ",".join(FORECAST_COLUMNS)
    return "\n".join([header, *out]) + "\n", faults


# ---------------------------------------------------------------------------------------------
# assembly


def _nice(x: float) -> int:
    """Round to two significant figures (at least 1)."""
    if x < 10:
        return max(1, round(x))
    step = 10 ** (int(np.floor(np.log10(x))) - 1)
    return int(round(x / step) * step)


def generate_scenario(*, seed: int = DEFAULT_SEED) -> Scenario:
    """Build the whole invented scenario from ``seed``; same seed, same scenario. O(teams x weeks)."""
    root = np.random.SeedSequence(seed)
    epi_ss, rep_ss, plan_ss, thr_ss, fault_ss, *team_ss = root.spawn(5 + len(TEAMS))
    plan_rng = np.random.default_rng(plan_ss)

    week_endings = _week_endings()
    issue_dates = _issue_dates()
    holiday_week = week_endings.index(HOLIDAY_DATE + dt.timedelta(days=1))

    truth_reg, epi_params = _simulate_truth(np.random.default_rng(epi_ss))
    vint_reg, nrev_reg = _simulate_reporting(truth_reg, holiday_week, np.random.default_rng(rep_ss))
    # series axis: the regions, then the whole jurisdiction (sum of the regions' counts)
    series = [*REGIONS, TOTAL_REGION]
    truth = np.concatenate([truth_reg, truth_reg.sum(axis=1, keepdims=True)], axis=1)
    vintages = np.concatenate([vint_reg, vint_reg.sum(axis=1, keepdims=True)], axis=1)
    n_rev = np.concatenate([nrev_reg, nrev_reg.max(axis=1, keepdims=True)], axis=1)

    week_ts = pd.to_datetime([d.isoformat() for d in week_endings])
    n_q, n_s, n_w = truth.shape

    # truth table
    qq, ss, ww = np.meshgrid(np.arange(n_q), np.arange(n_s), np.arange(n_w), indexing="ij")
    truth_table = pd.DataFrame(
        {
            "region": [series[k].id for k in ss.ravel()],
            "quantity": [QUANTITIES[k] for k in qq.ravel()],
            "week_ending": week_ts[ww.ravel()],
            "value": truth.ravel(),
        }
    )
    truth_table = truth_table.sort_values(["region", "quantity", "week_ending"], ignore_index=True)

    # observations: every vintage published by the last issue date
    rows_q, rows_s, rows_w, rows_j = [], [], [], []
    for j in range(4):
        keep = (j <= n_rev) & (np.arange(n_w)[None, None, :] + j <= n_w - 1)
        q_idx, s_idx, w_idx = np.nonzero(keep)
        rows_q.append(q_idx)
        rows_s.append(s_idx)
        rows_w.append(w_idx)
        rows_j.append(np.full(len(q_idx), j))
    oq, os_, ow, oj = (np.concatenate(a) for a in (rows_q, rows_s, rows_w, rows_j))
    observations = pd.DataFrame(
        {
            "region": [series[k].id for k in os_],
            "quantity": [QUANTITIES[k] for k in oq],
            "week_ending": week_ts[ow],
            "value": vintages[oq, os_, ow, oj],
            "reported": week_ts[ow] + pd.to_timedelta(7 * oj + 2, unit="D"),
        }
    )
    observations = observations.sort_values(
        ["region", "quantity", "week_ending", "reported"], ignore_index=True
    )

    # forecasts: one (series, quantity, horizon, level) block per team and issue date
    malformed_team = next(k for k, t in enumerate(TEAMS) if t.malformed)
    malformed_issue = int(plan_rng.integers(8, 14))
    order = np.argsort([s.id for s in series], kind="stable")
    plans = [(k, i) for k, team in enumerate(TEAMS) for i in _issue_plan(team, plan_rng)]
    values = np.empty((len(plans), n_s, n_q, len(HORIZONS), len(LEVELS)))
    jitters = {
        k: team.jitter * np.random.default_rng(team_ss[k]).standard_normal((N_ISSUES, n_s, n_q))
        for k, team in enumerate(TEAMS)
    }
    for f, (k, i) in enumerate(plans):
        t = _issue_week_index(i)
        weeks_seen = np.arange(t + 1)
        for pos, s_k in enumerate(order):
            for q_k in range(n_q):
                seen = vintages[q_k, s_k, weeks_seen, np.minimum(t - weeks_seen, 3)]
                values[f, pos, q_k] = _project(
                    seen, vintages[q_k, s_k], t, TEAMS[k], float(jitters[k][i, s_k, q_k])
                )
    per_file = n_s * n_q * len(HORIZONS) * len(LEVELS)
    issued_ts = pd.to_datetime([issue_dates[i].isoformat() for _, i in plans])
    horizon_days = np.array([7 * h - 2 for h in HORIZONS])
    targets = issued_ts.values[:, None, None, None, None] + np.broadcast_to(
        horizon_days[None, None, None, :, None], (1, n_s, n_q, len(HORIZONS), len(LEVELS))
    ).astype("timedelta64[D]")
    forecasts = pd.DataFrame(
        {
            "model": np.repeat(np.array([TEAMS[k].id for k, _ in plans]), per_file),
            "region": np.tile(
                np.repeat(np.array([series[s_k].id for s_k in order]), per_file // n_s),
                len(plans),
            ),
            "quantity": np.tile(
                np.repeat(np.array(QUANTITIES), len(HORIZONS) * len(LEVELS)), len(plans) * n_s
            ),
            "issued": np.repeat(issued_ts.values, per_file),
            "week_ending": np.broadcast_to(targets, values.shape).ravel(),
            "level": np.tile(np.array(LEVELS), len(plans) * n_s * n_q * len(HORIZONS)),
            "value": values.ravel(),
        }
    )
    bad = (forecasts["model"] == TEAMS[malformed_team].id) & (
        forecasts["issued"] == pd.Timestamp(issue_dates[malformed_issue].isoformat())
    )
    malformed: dict[tuple[str, str], str] = {}
    fault_notes: list[dict[str, Any]] = []
    if bad.any():
        text, faults = _malformed_text(
            forecasts[bad].reset_index(drop=True), np.random.default_rng(fault_ss)
        )
        issued_iso = issue_dates[malformed_issue].isoformat()
        malformed[(TEAMS[malformed_team].id, issued_iso)] = text
        fault_notes.append(
            {"model": TEAMS[malformed_team].id, "issued": issued_iso, "faults": faults}
        )
    submissions = forecasts[~bad].sort_values(
        ["model", "issued", "region", "quantity", "week_ending", "level"], ignore_index=True
    )

    # alert thresholds: a line near each series' peak, some above it and some below
    thr_rng = np.random.default_rng(thr_ss)
    factor = thr_rng.uniform(0.9, 1.45, (n_q, n_s))
    thresholds = {
        s.id: {QUANTITIES[q]: _nice(truth[q, k].max() * factor[q, k]) for q in range(n_q)}
        for k, s in enumerate(series)
    }

    meta: dict[str, Any] = {
        "note": "Entirely invented demo scenario; any likeness to real places, agencies, "
        "teams or outbreaks is accidental.",
        "seed": seed,
        "jurisdiction": {"name": JURISDICTION_NAME, "short_name": "Kestrelmark"},
        "total_region": TOTAL_REGION.id,
        "regions": [
            {"id": s.id, "name": s.name, "population": s.population}
            for s in sorted(series, key=lambda s: s.id)
        ],
        "quantities": [dict(q) for q in _QUANTITY_META],
        "thresholds": [
            {
                "region": s.id,
                "quantity": q,
                "value": thresholds[s.id][q],
                "label": "bed-capacity alert line" if q == "admissions" else "deaths alert line",
            }
            for s in sorted(series, key=lambda s: s.id)
            for q in QUANTITIES
        ],
        "teams": [
            {"id": t.id, "name": t.name, "description": t.description, "behaviour": t.behaviour}
            for t in TEAMS
        ],
        "levels": [level_text(x) for x in LEVELS],
        "horizons": list(HORIZONS),
        "season": {
            "first_week_ending": week_endings[0].isoformat(),
            "last_week_ending": week_endings[-1].isoformat(),
            "first_issued": issue_dates[0].isoformat(),
            "last_issued": issue_dates[-1].isoformat(),
        },
        "holiday": {
            "name": HOLIDAY_NAME,
            "date": HOLIDAY_DATE.isoformat(),
            "week_ending": week_endings[holiday_week].isoformat(),
        },
        "malformed_files": fault_notes,
        "wave": {
            "model": "daily SEIR per region with light coupling; weekly negative-binomial noise",
            "regions": [r.id for r in REGIONS],
            "simulation_start": (
                week_endings[0] - dt.timedelta(days=6 + _LEAD_IN_DAYS)
            ).isoformat(),
            **epi_params,
        },
    }
    return Scenario(
        seed=seed,
        truth=truth_table,
        observations=observations,
        submissions=submissions,
        malformed=malformed,
        meta=meta,
    )
