"""The invented demo scenario: a wave in an invented jurisdiction, its reporting, and its forecasters.

Everything here is made up: the Commonwealth of Kestrelmark, its six regions, the Emberwake Day
holiday, the illness wave and the eight modelling teams. Any likeness to a real place, agency,
team or outbreak is accidental.

The scenario is built in four steps, all from one seed and without touching any file:

1. **Truth.** For each region and quantity the complete weekly count is
   ``y_t = round(m_t * exp(u_t))``. ``m_t`` is a smooth deterministic rise-and-fall curve (a
   floor plus a peak made of two exponentials: growth at rate ``a`` per week before the peak,
   decay at rate ``b`` after it), with every region's admissions peaking 5.5-8 weeks before the
   last season week, so the wave rises and falls inside the 12 rated weeks and the last issue
   date sits on the falling side. ``u_t`` is a log-scale AR(1),
   ``u_t = rho * u_{t-1} + e_t + c_t`` with ``e_t ~ N(0, s^2)`` per region and a small shock
   ``c_t ~ N(0, s_c^2)`` shared by all regions in a week. Deaths follow the same construction
   on a smaller curve about a week behind the admissions curve. The whole-jurisdiction series
   is the sum of the regions' counts. Four weeks beyond the season are simulated too: they
   are the targets of the last issue date (``Scenario.truth_ahead``, never published).
2. **Reporting.** Each week is first published on the Monday after it ends at 75-90 % of its
   true count (50-62 % in the holiday week), then revised upwards over the next 1-3 Mondays
   until complete. Every published value is kept as a vintage.
3. **Forecasts.** The reference team is *calibrated by construction*: on each issue Monday an
   oracle tells it the mean curves and the complete (not the provisional) value of the latest
   published week ``t``, that is ``u_t``, and it gives the exact quantiles of ``y_{t+h}``
   given ``u_t``: log-normal with log median ``log m_{t+h} + rho^h u_t`` and log variance
   ``(s^2 + s_c^2) (1 - rho^{2h}) / (1 - rho^2)`` (before the rounding to whole counts). The
   whole jurisdiction's quantiles come from 4000 seeded joint draws of the same conditional
   distribution, summed over the regions. Every other team is one honest, named deviation
   from that forecast (spread multiplied, median shifted, a week late, its own model error),
   so each team's designed behaviour is a real property of its forecasts against the
   complete counts.
4. **Faults.** One team's file in one week is written with several faults (a value as text,
   crossing quantiles, a duplicated row, a missing level); its other weeks are clean.

Cost: 40 weeks x 6 regions x 2 quantities of truth; 18 issue dates x 2 quantities x 4000 joint
draws shared by the 8 teams; well under a second.
"""

from __future__ import annotations

import datetime as dt
import math
from dataclasses import dataclass, field
from statistics import NormalDist
from typing import Any

import numpy as np
import pandas as pd

from forebrief.demo.csvtext import forecast_csv_lines, level_text
from forebrief.tables.schema import FORECAST_COLUMNS

__all__ = [
    "DEFAULT_SEED",
    "HORIZONS",
    "LEVELS",
    "QUANTITIES",
    "RATING_WEEKS",
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
#: Observed target weeks behind each rating in the demo's configuration ([scoring] window).
RATING_WEEKS = 12

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
    """An invented modelling team: how its forecast departs from the calibrated one.

    Every team starts from the scenario's own predictive distribution (module docstring, step
    3) and changes it in the ways named here. spread: multiplier on the log-scale spread;
    bias: added to the log median (``log(1.35)`` puts every median 35 % high); lag: weeks
    late (it re-issues the forecast it would have made ``lag`` weeks earlier, for the same
    horizons, so its targets are ``lag`` weeks behind); jitter: sd of the team's own model
    error, added to the log median per issue date, region and quantity; first_issue: index of
    its first issue week (0 = first of the 18); skips: issue weeks missed; malformed: one of
    its files is written with faults; expected_verdict: the verdict its design should earn
    against the complete counts ("reliable", "overconfident", "underconfident", "biased
    high", "biased low", "lags" or "not yet rated").
    """

    id: str
    name: str
    description: str
    behaviour: str
    expected_verdict: str = "reliable"
    spread: float = 1.0
    bias: float = 0.0
    lag: int = 0
    jitter: float = 0.0
    first_issue: int = 0
    skips: int = 0
    malformed: bool = False


TEAMS: tuple[TeamSpec, ...] = (
    TeamSpec(
        "copperfinch",
        "Copper Finch Modelling Group",
        "Forecasts from the scenario's own model, told the complete count of the latest week: "
        "calibrated by construction.",
        "well calibrated (the scenario's own forecast distribution)",
        expected_verdict="reliable",
    ),
    TeamSpec(
        "glassheron",
        "Glass Heron Analytics",
        "The right central forecasts, but ranges only 0.4 times as wide as they should be.",
        "overconfident (ranges far too narrow)",
        expected_verdict="overconfident",
        spread=0.4,
    ),
    TeamSpec(
        "mothlight",
        "Mothlight Research Unit",
        "The right central forecasts, but ranges 2.5 times as wide as they should be.",
        "underconfident (ranges far too wide)",
        expected_verdict="underconfident",
        spread=2.5,
    ),
    TeamSpec(
        "amberkite",
        "Amber Kite Consultancy",
        "Leans towards the worst case: every forecast is 35 % higher than it should be.",
        "biased high (medians 35 % too high)",
        expected_verdict="biased high",
        bias=math.log(1.35),
    ),
    TeamSpec(
        "driftotter",
        "Drift Otter Collective",
        "Sends the forecast it would have made a week earlier, so it is a week late at every "
        "turn of the wave.",
        "lags the wave by a week (too low while it rises, too high while it falls)",
        expected_verdict="lags",
        lag=1,
    ),
    TeamSpec(
        "pebblewren",
        "Pebble Wren Lab",
        "A small volunteer team that submits when it can; close to calibrated, with a little "
        "model error of its own and slightly wider ranges to allow for it.",
        "skips some weeks (4 of the 18)",
        expected_verdict="reliable",
        spread=1.1,
        jitter=0.06,
        skips=4,
    ),
    TeamSpec(
        "freshsprout",
        "Fresh Sprout Forecasting",
        "A new team that joined in the last three weeks of the season; close to calibrated, "
        "but with too little history to be rated.",
        "new entrant without history (the last 3 issue dates)",
        expected_verdict="not yet rated",
        jitter=0.03,
        first_issue=N_ISSUES - 3,
    ),
    TeamSpec(
        "inkbadger",
        "Ink Badger Institute",
        "Solid forecasts with slightly wide ranges, but its submission pipeline once sent a "
        "broken file.",
        "one malformed file (otherwise close to calibrated)",
        expected_verdict="reliable",
        spread=1.12,
        jitter=0.04,
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
    truth_ahead: like ``truth`` for the weeks after the season that the last issue date's
        forecasts target (never published, not written to any file).
    """

    seed: int
    truth: pd.DataFrame
    observations: pd.DataFrame
    submissions: pd.DataFrame
    malformed: dict[tuple[str, str], str] = field(default_factory=dict)
    meta: dict[str, Any] = field(default_factory=dict)
    truth_ahead: pd.DataFrame = field(default_factory=pd.DataFrame)


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

#: Weeks simulated after the season: the targets of the last issue date.
_N_AHEAD = max(HORIZONS)
#: Log-scale AR(1) noise per quantity (admissions, deaths): persistence rho, sd s of the
#: regional shock, sd s_c of the shock common to all regions in a week.
_RHO = np.array([0.6, 0.5])
_SD = np.array([0.10, 0.13])
_SD_COMMON = np.array([0.04, 0.04])


def _wave_curve(
    x: np.ndarray, *, rise: np.ndarray, fall: np.ndarray, floor: np.ndarray
) -> np.ndarray:
    """Smooth rise-and-fall curve of the weeks ``x`` from the peak, 1 at the peak.

    ``floor + (1 - floor) g(x)`` with ``g(x) = (a + b) / (b e^{-a x} + a e^{b x})``: g grows
    like ``e^{a x}`` well before the peak (a = ``rise``), decays like ``e^{-b x}`` well after
    it (b = ``fall``), and its only maximum is g(0) = 1. Arguments broadcast.
    """
    a, b = rise, fall
    g = (a + b) / (b * np.exp(-a * x) + a * np.exp(b * x))
    return floor + (1.0 - floor) * g


def _ar1_noise(shape: tuple[int, int], q: int, rng: np.random.Generator) -> np.ndarray:
    """Log-scale noise u (region, week) of quantity ``q``, started from its stationary law."""
    n_reg, n_weeks = shape
    rho, s, s_c = _RHO[q], _SD[q], _SD_COMMON[q]
    scale = 1.0 / math.sqrt(1.0 - rho**2)
    u = np.empty(shape)
    u[:, 0] = scale * (s * rng.standard_normal(n_reg) + s_c * rng.standard_normal())
    for w in range(1, n_weeks):
        u[:, w] = rho * u[:, w - 1] + s * rng.standard_normal(n_reg) + s_c * rng.standard_normal()
    return u


def _simulate_truth(rng: np.random.Generator) -> tuple[np.ndarray, np.ndarray, dict[str, Any]]:
    """Mean curves m and log-scale noise u, each (quantity, region, week), regions only.

    Weeks run over the season and ``_N_AHEAD`` weeks beyond it; the complete counts are
    ``round(m * exp(u))``.
    """
    n_reg = len(REGIONS)
    pop = np.array([r.population for r in REGIONS], dtype=float)
    peak = rng.uniform(N_SEASON_WEEKS - 9.0, N_SEASON_WEEKS - 6.5, n_reg)  # admissions peak
    rise = rng.uniform(0.30, 0.40, n_reg)
    fall = rng.uniform(0.19, 0.25, n_reg)
    floor = rng.uniform(0.04, 0.07, n_reg)
    peak_per_100k = rng.uniform(20.0, 36.0, n_reg)
    deaths_share = rng.uniform(0.08, 0.13, n_reg)
    deaths_lag = rng.uniform(0.6, 1.1, n_reg)

    weeks = np.arange(N_SEASON_WEEKS + _N_AHEAD, dtype=float)
    height = peak_per_100k * pop / 1e5
    shape = {"rise": rise[:, None], "fall": fall[:, None], "floor": floor[:, None]}
    adm = height[:, None] * _wave_curve(weeks[None, :] - peak[:, None], **shape)
    deaths = (deaths_share * height)[:, None] * _wave_curve(
        weeks[None, :] - (peak + deaths_lag)[:, None], **shape
    )
    mean = np.stack([adm, deaths])
    noise = np.stack([_ar1_noise(adm.shape, q, rng) for q in range(len(QUANTITIES))])
    params = {
        "peak_per_100k": peak_per_100k.round(2).tolist(),
        "rise_per_week": rise.round(3).tolist(),
        "fall_per_week": fall.round(3).tolist(),
        "floor_share_of_peak": floor.round(3).tolist(),
        "deaths_share_of_admissions": deaths_share.round(3).tolist(),
        "deaths_lag_weeks": deaths_lag.round(2).tolist(),
        "noise": {
            q: {"rho": float(_RHO[k]), "sd": float(_SD[k]), "sd_common": float(_SD_COMMON[k])}
            for k, q in enumerate(QUANTITIES)
        },
    }
    return mean, noise, params


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
_H = np.array(HORIZONS)
#: Joint draws per issue date and quantity for the whole jurisdiction's quantiles.
_N_DRAWS = 4000


def _horizon_sd(q: int) -> np.ndarray:
    """Log-scale sd of y_{t+h} given u_t, per horizon: s_tot^2 (1 - rho^2h) / (1 - rho^2)."""
    rho = _RHO[q]
    return np.sqrt((_SD[q] ** 2 + _SD_COMMON[q] ** 2) * (1.0 - rho ** (2 * _H)) / (1.0 - rho**2))


def _noise_paths(q: int, rng: np.random.Generator) -> np.ndarray:
    """Draws (draw, region, horizon) of ``u_{t+h} - rho^h u_t``: the noise still to come."""
    n_reg = len(REGIONS)
    rho, s, s_c = _RHO[q], _SD[q], _SD_COMMON[q]
    shocks = s * rng.standard_normal((_N_DRAWS, n_reg, len(_H)))
    shocks += s_c * rng.standard_normal((_N_DRAWS, 1, len(_H)))
    paths = np.empty_like(shocks)
    acc = np.zeros((_N_DRAWS, n_reg))
    for k in range(len(_H)):
        acc = rho * acc + shocks[:, :, k]
        paths[:, :, k] = acc
    return paths


def _forecast(
    team: TeamSpec,
    mean: np.ndarray,
    noise: np.ndarray,
    t: int,
    q: int,
    paths: np.ndarray,
    jitter: np.ndarray,
) -> np.ndarray:
    """Quantiles (series, horizon, level) of one team on the issue date whose latest week is t.

    ``mean``, ``noise``: (region, week) of quantity ``q``; ``paths``: ``_noise_paths`` draws;
    ``jitter``: the team's own log error per region. The regions' quantiles are exact
    log-normal ones; the whole jurisdiction (last series) is the sum of the regions' rounded
    joint draws. The team uses what it knew ``team.lag`` weeks earlier, for targets that many
    weeks earlier (zero lag: the calibrated forecast).
    """
    t0 = t - team.lag
    log_median = np.log(mean[:, t0 + _H]) + _RHO[q] ** _H * noise[:, [t0]] + team.bias
    log_median += jitter[:, None]
    sd = team.spread * _horizon_sd(q)
    regional = np.exp(log_median[:, :, None] + sd[None, :, None] * _Z[None, None, :])
    draws = np.rint(np.exp(log_median[None] + team.spread * paths)).sum(axis=1)
    total = np.quantile(draws, LEVELS, axis=0).T
    out = np.concatenate([regional, total[None]], axis=0)
    return np.round(out, 1) + 0.0  # + 0.0 turns -0.0 into 0.0


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


def _long_table(
    values: np.ndarray, series: list[RegionSpec], weeks: pd.DatetimeIndex
) -> pd.DataFrame:
    """region, quantity, week_ending, value from counts (quantity, series, week)."""
    n_q, n_s, n_w = values.shape
    qq, ss, ww = np.meshgrid(np.arange(n_q), np.arange(n_s), np.arange(n_w), indexing="ij")
    table = pd.DataFrame(
        {
            "region": [series[k].id for k in ss.ravel()],
            "quantity": [QUANTITIES[k] for k in qq.ravel()],
            "week_ending": weeks[ww.ravel()],
            "value": values.ravel(),
        }
    )
    return table.sort_values(["region", "quantity", "week_ending"], ignore_index=True)


def generate_scenario(*, seed: int = DEFAULT_SEED) -> Scenario:
    """Build the whole invented scenario from ``seed``; same seed, same scenario. O(teams x weeks)."""
    root = np.random.SeedSequence(seed)
    epi_ss, rep_ss, plan_ss, thr_ss, fault_ss, draw_ss, *team_ss = root.spawn(6 + len(TEAMS))
    plan_rng = np.random.default_rng(plan_ss)

    week_endings = _week_endings()
    issue_dates = _issue_dates()
    holiday_week = week_endings.index(HOLIDAY_DATE + dt.timedelta(days=1))

    mean, noise, wave_params = _simulate_truth(np.random.default_rng(epi_ss))
    counts = np.rint(mean * np.exp(noise)).astype(np.int64)
    truth_reg = counts[:, :, :N_SEASON_WEEKS]
    vint_reg, nrev_reg = _simulate_reporting(truth_reg, holiday_week, np.random.default_rng(rep_ss))
    # series axis: the regions, then the whole jurisdiction (sum of the regions' counts)
    series = [*REGIONS, TOTAL_REGION]
    counts = np.concatenate([counts, counts.sum(axis=1, keepdims=True)], axis=1)
    truth = counts[:, :, :N_SEASON_WEEKS]
    vintages = np.concatenate([vint_reg, vint_reg.sum(axis=1, keepdims=True)], axis=1)
    n_rev = np.concatenate([nrev_reg, nrev_reg.max(axis=1, keepdims=True)], axis=1)

    week_ts = pd.to_datetime([d.isoformat() for d in week_endings])
    ahead_ts = pd.to_datetime(
        [(LAST_WEEK_ENDING + dt.timedelta(weeks=k)).isoformat() for k in range(1, _N_AHEAD + 1)]
    )
    n_q, n_s, n_w = truth.shape
    truth_table = _long_table(truth, series, week_ts)
    truth_ahead = _long_table(counts[:, :, N_SEASON_WEEKS:], series, ahead_ts)

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

    # forecasts: one (series, quantity, horizon, level) block per team and issue date; the
    # joint draws of one issue date and quantity are shared by the teams
    malformed_team = next(k for k, t in enumerate(TEAMS) if t.malformed)
    malformed_issue = int(plan_rng.integers(8, 14))
    order = np.argsort([s.id for s in series], kind="stable")
    plans = [(k, i) for k, team in enumerate(TEAMS) for i in _issue_plan(team, plan_rng)]
    row_of = {plan: f for f, plan in enumerate(plans)}
    values = np.empty((len(plans), n_s, n_q, len(HORIZONS), len(LEVELS)))
    jitters = [
        team.jitter
        * np.random.default_rng(team_ss[k]).standard_normal((N_ISSUES, len(REGIONS), n_q))
        for k, team in enumerate(TEAMS)
    ]
    draw_rng = np.random.default_rng(draw_ss)
    for i in range(N_ISSUES):
        t = _issue_week_index(i)
        for q_k in range(n_q):
            paths = _noise_paths(q_k, draw_rng)
            for k, team in enumerate(TEAMS):
                f = row_of.get((k, i))
                if f is None:
                    continue
                block = _forecast(team, mean[q_k], noise[q_k], t, q_k, paths, jitters[k][i, :, q_k])
                values[f, :, q_k] = block[order]
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
            {
                "id": t.id,
                "name": t.name,
                "description": t.description,
                "behaviour": t.behaviour,
                "expected_verdict": t.expected_verdict,
                "design": {
                    "spread_factor": t.spread,
                    "median_factor": round(math.exp(t.bias), 4),
                    "weeks_late": t.lag,
                    "own_error_sd": t.jitter,
                },
            }
            for t in TEAMS
        ],
        "levels": [level_text(x) for x in LEVELS],
        "horizons": list(HORIZONS),
        "season": {
            "first_week_ending": week_endings[0].isoformat(),
            "last_week_ending": week_endings[-1].isoformat(),
            "first_issued": issue_dates[0].isoformat(),
            "last_issued": issue_dates[-1].isoformat(),
            "rated_weeks": {
                "first_week_ending": week_endings[-RATING_WEEKS].isoformat(),
                "last_week_ending": week_endings[-1].isoformat(),
            },
        },
        "holiday": {
            "name": HOLIDAY_NAME,
            "date": HOLIDAY_DATE.isoformat(),
            "week_ending": week_endings[holiday_week].isoformat(),
        },
        "malformed_files": fault_notes,
        "wave": {
            "model": "complete count = round(m * exp(u)): m a smooth rise-and-fall curve per "
            "region (deaths about a week behind admissions), u a log-scale AR(1) with a small "
            "shock shared by the regions each week",
            "regions": [r.id for r in REGIONS],
            "peak_week_ending": {
                q: {
                    s.id: week_endings[int(np.argmax(truth[q_k, k]))].isoformat()
                    for k, s in sorted(enumerate(series), key=lambda ks: ks[1].id)
                }
                for q_k, q in enumerate(QUANTITIES)
            },
            **wave_params,
        },
    }
    return Scenario(
        seed=seed,
        truth=truth_table,
        observations=observations,
        submissions=submissions,
        malformed=malformed,
        meta=meta,
        truth_ahead=truth_ahead,
    )
