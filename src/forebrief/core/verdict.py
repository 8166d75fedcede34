"""A plain verdict on a model's recent record, counting each piece of evidence once.

Pure numerical core (numpy and scipy; no tables, no files). The inputs are the Classical Model
bins of a model's scored items for one quantity (the interquantile bins of its quantiles,
Cooke 1991, *Experts in Uncertainty*, OUP, ch. 12) with, for each item, its evidence unit, the
unit's target week and the item's horizon.

How evidence is counted (the design; its size and power are measured by the simulation study
in ``tests/test_verdict_simulation.py``, whose docstring gives the table):

1. **A target week is one piece of evidence.** The forecasts made 1, 2, 3 and 4 weeks ahead
   for one region and week are judged against the same observation, and their errors share
   the surprises of the weeks before it, so their bins are strongly dependent. An evidence
   unit is one region and target week; its forecasts share a total weight of 1 equally, so the
   unit contributes the share of its forecasts that fell in each bin and the calibration test
   counts N = number of units. When every unit has all H horizons this is Cooke's calibration
   power 1/H on the pooled counts (Cooke 1991, ch. 12, scales the statistic by a power below 1
   for dependent items).
2. **The jurisdiction total is not extra evidence.** It is the sum of its regions, so its
   observation is fixed by theirs: :func:`evidence_units` keeps a total item only for a target
   week in which the model forecast none of the regions.
3. **Regions of one week move together.** A shared surprise (weather, a school term, a change
   in reporting) moves every region's observation in the same week, so six regions in a week
   carry less than six independent pieces of evidence. Units are clustered by target week and
   Kish's design effect deff = 1 + (b - 1) rho is estimated from the data (Kish 1965, *Survey
   Sampling*, Wiley; section from memory: 5.4), with rho the one-way analysis-of-variance
   intraclass correlation between weeks for unequal cluster sizes (Donner 1986, Int. Stat.
   Rev. 54:67-82) and b = sum_w m_w^2 / N the size-weighted mean number of units per week.
   rho is clipped to [0, 1], so deff >= 1: no test counts more than one piece of evidence per
   unit. :func:`design_effect` gives the formulas.
4. **The calibration test** is Cooke's statistic 2 N I(s, p) on the units' shares (Cooke 1991,
   ch. 12) divided by deff, with rho pooled over the bins with the weights 1/p_j of the
   statistic: the first-order correction of Rao & Scott (1981, JASA 76:221-230) for
   goodness-of-fit tests on clustered samples. With W >= 2 weeks the corrected statistic over
   R - 1 is referred to F(R - 1, W - 1), the F form that allows for a design effect estimated
   from few clusters (Thomas & Rao 1987, JASA 82:630-636, use (R - 1)(W - 1) denominator
   degrees of freedom; we use W - 1 because the sparse outer bins dominate the 1/p_j-weighted
   estimate, and the simulation study found the larger value too liberal). With one week, or
   one unit per week, deff = 1 and the test is Cooke's chi-square test with R - 1 degrees of
   freedom.
5. **The pattern tests use the shortest horizon.** The errors of 2- to 4-week-ahead forecasts
   of neighbouring target weeks overlap, while the probability integral transforms of ideal
   1-step-ahead forecasts are independent over time (Diebold, Gunther & Tay 1998, Int. Econ.
   Rev. 39:863-883; h-step ones are (h - 1)-dependent). The simulation study found the
   horizon-averaged share below the median about 1.5 times as variable as binomial even
   without shared surprises, so the binomial tests that name a failure use one forecast per
   unit, the one with the record's shortest horizon. Each test divides its counts by the Kish
   design effect of its own indicator and rounds them to whole target weeks (the effective
   sample size and effective number of successes of Rao & Scott 1992, Biometrics 48:577-585,
   from memory), then runs an exact binomial test (:func:`binomial_p`).

Verdict rules (our design; each test at ``test_level``; common practice, no source):

- not yet rated: the caller's history rule says too little (``rated=False``) or no items;
- reliable: the calibration test passes;
- otherwise the failure is named from three patterns: a **bias** (the observation falls below
  the median significantly more or less often than half the time; two-sided), ranges **too
  narrow** (more observations than expected outside the outer range; one-sided) or **too
  wide** (fewer outside the outer range, or more inside the central range; one-sided);
- when a bias and a spread pattern are both significant, the bias is named if the misses of
  the outer range fall significantly more often on the bias side (two-sided test of the lower
  misses among all misses): one-sided misses are a shifted forecast, not narrow ranges. A bias
  alone is named too;
- else the clearer spread pattern (smaller p-value) is named; else "unreliable".

Cost of :func:`rate_record`: O(n x R) for n items and R bins, plus six binomial tests of at
most n trials each.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Literal, get_args

import numpy as np
from scipy.special import bdtr, bdtrc, chdtrc, fdtrc, gammaln

from forebrief.core.classical import relative_entropy

__all__ = [
    "VERDICT_NAMES",
    "EvidenceUnits",
    "Verdict",
    "VerdictName",
    "binomial_p",
    "design_effect",
    "evidence_units",
    "rate_record",
]

VerdictName = Literal[
    "reliable",
    "overconfident",
    "underconfident",
    "biased high",
    "biased low",
    "unreliable",
    "not yet rated",
]
#: The verdicts in the order a briefing lists them.
VERDICT_NAMES: tuple[VerdictName, ...] = get_args(VerdictName)

Alternative = Literal["two-sided", "greater", "less"]

_TOL = 1e-9
#: A design effect below this is not worth a clause in the explanation (our convention).
_NOTE_DEFF = 1.05
#: "Most misses on one side" means at least this share of them (our convention, no source).
_MOST = 0.75


@dataclass(frozen=True)
class Verdict:
    """A verdict on one model's record for one quantity, with every number behind it.

    Calibration test (all horizons): ``n_evidence`` units (region and target week) in
    ``n_weeks`` weeks from ``n_items`` forecasts; ``shares`` are the target weeks in each bin
    (each unit's forecasts share one unit of weight, so they sum to ``n_evidence``);
    ``design_effect`` and ``n_effective`` = ``n_evidence`` / ``design_effect`` are what the
    test counts; ``calibration_p`` is its p-value.

    Pattern tests (one forecast per unit at ``pattern_horizon`` weeks ahead, ``n_pattern``
    target weeks): ``outside``, ``below``, ``inside_central``, ``misses_below`` and
    ``misses_above`` are the numbers of target weeks the explanation cites, with the
    ``expected_*`` values a calibrated model would give; ``*_p`` are the tests' p-values and
    ``*_deff`` the design effects that divided their counts. p-values are nan when the test
    does not apply (no items, no 0.5 level for the median, no misses for the side test).
    """

    verdict: VerdictName
    explanation: str
    n_items: int
    n_evidence: int
    n_weeks: int
    design_effect: float
    n_effective: float
    calibration_p: float
    shares: tuple[float, ...]
    pattern_horizon: int
    n_pattern: int
    outer_level: float
    central_level: float
    outside: int
    expected_outside: float
    below: int
    expected_below: float
    inside_central: int
    expected_inside_central: float
    misses_below: int
    misses_above: int
    bias_p: float
    narrow_p: float
    wide_p: float
    misses_side_p: float
    outside_deff: float
    central_deff: float
    below_deff: float
    side_deff: float


@dataclass(frozen=True, eq=False)
class EvidenceUnits:
    """Which items count as evidence, and the unit and target week of each item.

    ``keep`` has one entry per input item; ``target`` and ``week`` give every item (kept or
    not) a 0-based code of its unit (one per distinct region and week) and of its week.
    """

    keep: np.ndarray
    target: np.ndarray
    week: np.ndarray


def _codes(name: str, values: np.ndarray, n: int | None = None) -> np.ndarray:
    v = np.asarray(values)
    if v.ndim != 1 or (v.size and not np.issubdtype(v.dtype, np.integer)):
        raise ValueError(
            f"{name} must be a 1-d array of integer codes; got shape {v.shape}, dtype {v.dtype}"
        )
    if n is not None and v.size != n:
        raise ValueError(f"{name} has {v.size} entries but there are {n} items; give one per item")
    return v.astype(np.int64)


def _inverse(values: np.ndarray) -> tuple[int, np.ndarray]:
    """(number of distinct values, 0-based code of each value)."""
    uniq, inv = np.unique(values, return_inverse=True)
    return int(uniq.size), inv.reshape(-1).astype(np.int64)


def evidence_units(region: np.ndarray, week: np.ndarray, *, total: int | None) -> EvidenceUnits:
    """Evidence units of a model's items: one per (region, target week); the total dropped.

    ``region`` and ``week`` are integer codes per item (for instance from ``pd.factorize``);
    ``total`` is the code of the jurisdiction total (None if there is none). A total item is
    kept only for a week in which no regional item exists: the total is the sum of its regions,
    so when they are present its observation adds no evidence of its own (point 2 of the
    module docstring). Cost: O(n log n) for the codes.
    """
    r = _codes("region", region)
    w = _codes("week", week, r.size)
    is_total = np.zeros(r.size, dtype=bool) if total is None else r == int(total)
    keep = ~is_total
    if is_total.any():
        keep |= is_total & ~np.isin(w, w[~is_total])
    span = int(w.max()) - int(w.min()) + 1 if w.size else 1
    _, target = _inverse(
        (r - (int(r.min()) if r.size else 0)) * span + (w - (int(w.min()) if w.size else 0))
    )
    _, week_code = _inverse(w)
    return EvidenceUnits(keep=keep, target=target, week=week_code)


def design_effect(shares: np.ndarray, week: np.ndarray, *, probabilities: np.ndarray) -> float:
    """Kish's design effect 1 + (b - 1) rho of units clustered by target week (>= 1).

    ``shares`` (N, R): each unit's share of forecasts in each bin (rows sum to 1); ``week``
    (N,): integer week code of each unit; ``probabilities`` (R,): the bins' expected shares,
    whose inverses weight the bins as in the chi-square statistic. With W weeks of m_w units,
    the one-way analysis of variance for unequal cluster sizes (Donner 1986, Int. Stat. Rev.
    54:67-82) gives MSB = sum_w m_w |mean_w - mean|^2 / (W - 1), MSW = sum |x - mean_w|^2 /
    (N - W), m0 = (N - sum m_w^2 / N) / (W - 1) and rho = (MSB - MSW) / (MSB + (m0 - 1) MSW),
    where |.|^2 sums the bins with weights 1/p_j. b = sum m_w^2 / N (Kish 1965, *Survey
    Sampling*). rho is clipped to [0, 1]; with fewer than two weeks, one unit per week, or no
    spread at all, the design effect is 1. For one 0/1 indicator with share p, pass the
    columns (x, 1 - x) and probabilities (p, 1 - p): both columns give the same rho.
    Cost: O(N x R).
    """
    a = np.asarray(shares, dtype=float)
    n = a.shape[0]
    n_weeks, wk = _inverse(np.asarray(week))
    if n_weeks < 2 or n <= n_weeks:
        return 1.0
    m = np.bincount(wk, minlength=n_weeks).astype(float)
    sums = np.zeros((n_weeks, a.shape[1]))
    np.add.at(sums, wk, a)
    means = sums / m[:, None]
    grand = a.mean(axis=0)
    inv_p = 1.0 / np.asarray(probabilities, dtype=float)
    msb = float((m[:, None] * (means - grand) ** 2).sum(axis=0) @ inv_p) / (n_weeks - 1)
    msw = float(((a - means[wk]) ** 2).sum(axis=0) @ inv_p) / (n - n_weeks)
    m0 = (n - float((m**2).sum()) / n) / (n_weeks - 1)
    denominator = msb + (m0 - 1.0) * msw
    if not denominator > _TOL:
        return 1.0
    rho = min(max((msb - msw) / denominator, 0.0), 1.0)
    return 1.0 + (float((m**2).sum()) / n - 1.0) * rho


def binomial_p(k: int, n: int, p: float, *, alternative: Alternative) -> float:
    """Exact binomial test p-value of k successes in n trials with success probability p.

    The definitions of ``scipy.stats.binomtest``: one-sided P(X >= k) or P(X <= k); two-sided,
    the total probability of the outcomes no more likely than k (the "minimum likelihood"
    method, with scipy's relative tolerance 1e-7), computed with ``scipy.special`` so that a
    call costs microseconds. nan when n < 1, k is outside 0..n, or p is not inside (0, 1).
    Cost: O(n) two-sided, O(1) one-sided.
    """
    if n < 1 or not 0 <= k <= n or not 0.0 < p < 1.0:
        return math.nan
    if alternative == "greater":
        return 1.0 if k == 0 else float(bdtrc(k - 1, n, p))
    if alternative == "less":
        return float(bdtr(k, n, p))
    i = np.arange(n + 1)
    log_pmf = (
        gammaln(n + 1)
        - gammaln(i + 1)
        - gammaln(n - i + 1)
        + i * math.log(p)
        + (n - i) * math.log1p(-p)
    )
    pmf = np.exp(log_pmf)
    return float(min(1.0, pmf[pmf <= pmf[k] * (1.0 + 1e-7)].sum()))


def _whole(x: float) -> int:
    """Round half up to whole target weeks (round() goes half to even); the tolerance keeps
    sums of fractions such as 3 x 1/3 from rounding down."""
    return math.floor(x + 0.5 + _TOL)


def _structure(p: np.ndarray) -> tuple[int | None, float, float]:
    """(index of the first bin above the median, or None without a 0.5 level; outer range
    level; central range level, nan without a median)."""
    cum = np.cumsum(p)[:-1]
    hits = np.flatnonzero(np.abs(cum - 0.5) < 1e-6)
    half = int(hits[0]) + 1 if hits.size else None
    outer = 1.0 - float(p[0] + p[-1])
    central = float(p[half - 1] + p[half]) if half is not None else math.nan
    return half, outer, central


@dataclass(frozen=True)
class _Test:
    """One binomial pattern test on effective counts."""

    count: int  # target weeks (not yet divided by the design effect)
    expected: float
    deff: float
    p_greater: float
    p_less: float
    p_two: float


def _indicator_test(x: np.ndarray, week: np.ndarray, share: float) -> _Test:
    """Binomial tests of sum(x) against share x n, with counts divided by x's design effect."""
    n = x.size
    count = _whole(float(x.sum()))
    if n == 0 or not 0.0 < share < 1.0:
        return _Test(count, share * n, 1.0, math.nan, math.nan, math.nan)
    deff = design_effect(
        np.stack([x, 1.0 - x], axis=1), week, probabilities=np.array([share, 1.0 - share])
    )
    n_e = max(_whole(n / deff), 1)
    k_e = min(_whole(float(x.sum()) / deff), n_e)
    return _Test(
        count,
        share * n,
        deff,
        binomial_p(k_e, n_e, share, alternative="greater"),
        binomial_p(k_e, n_e, share, alternative="less"),
        binomial_p(k_e, n_e, share, alternative="two-sided"),
    )


def _pct(level: float) -> str:
    return f"{level * 100:.0f}%"


def rate_record(
    bins: np.ndarray,
    *,
    target: np.ndarray,
    week: np.ndarray,
    horizon: np.ndarray,
    probabilities: np.ndarray,
    rated: bool,
    test_level: float = 0.05,
    passes: bool | None = None,
) -> Verdict:
    """Verdict on one model for one quantity from its items' bins (see the module docstring).

    ``bins`` (n,): 0-based Classical Model bin of each scored item (from
    :func:`forebrief.core.classical.bin_index`); ``target`` (n,): the evidence unit of each
    item (an integer code of its region and target week, from :func:`evidence_units`, with the
    total's items already dropped); ``week`` (n,): the target-week code of each item, which
    clusters the units; ``horizon`` (n,): weeks ahead of each item (0 where it is not known:
    the explanation then names no horizon); ``probabilities`` (R,):
    the bins' expected shares (``forebrief.tables.schema.cm_probabilities(levels)``). ``rated`` is the
    caller's history rule. ``passes`` None (the default) runs the calibration test of the
    module docstring; True or False takes the caller's own decision instead (for counts the
    caller has already tested). Raises ValueError on mismatched arrays, a bin outside
    0..R-1, or a unit spanning several weeks. Cost: O(n x R) plus six binomial tests.
    """
    p = np.asarray(probabilities, dtype=float)
    if p.ndim != 1 or p.size < 2 or np.any(p <= 0) or abs(float(p.sum()) - 1.0) > 1e-6:
        raise ValueError(f"probabilities must be R >= 2 positive shares summing to 1; got {p!r}")
    if not 0.0 < float(test_level) < 1.0:
        raise ValueError(f"test_level must lie in (0, 1); got {test_level!r}")
    b = _codes("bins", bins)
    t = _codes("target", target, b.size)
    w = _codes("week", week, b.size)
    h = _codes("horizon", horizon, b.size)
    n_bins = p.size
    if b.size and (b.min() < 0 or b.max() >= n_bins):
        bad = int(b[(b < 0) | (b >= n_bins)][0])
        raise ValueError(f"bin {bad} is outside 0..{n_bins - 1}; drop items without a bin first")
    half, outer_level, central_level = _structure(p)

    # calibration: one unit of weight per region and target week
    n_units, unit = _inverse(t)
    per_unit = np.bincount(unit, minlength=n_units).astype(float)
    shares = np.zeros((n_units, n_bins))
    np.add.at(shares, (unit, b), 1.0 / per_unit[unit])
    unit_week = np.zeros(n_units, dtype=np.int64)
    unit_week[unit] = w
    if b.size and np.any(unit_week[unit] != w):
        bad = int(t[np.flatnonzero(unit_week[unit] != w)[0]])
        raise ValueError(
            f"evidence unit {bad} has items in more than one week; a unit is one "
            "region and target week"
        )
    n_weeks = int(np.unique(unit_week).size)
    deff = design_effect(shares, unit_week, probabilities=p) if n_units else 1.0
    eff = shares.sum(axis=0)
    if n_units:
        g = 2.0 * n_units * float(relative_entropy(eff, p))
        if n_weeks >= 2 and n_units > n_weeks:
            cal = float(fdtrc(n_bins - 1, n_weeks - 1, g / deff / (n_bins - 1)))
        else:
            cal = float(chdtrc(n_bins - 1, g))
    else:
        cal = math.nan

    # patterns: one forecast per unit at the shortest horizon
    h_min = int(h.min()) if h.size else 0
    at = h == h_min
    n_pat, pu = _inverse(t[at])
    per_pu = np.bincount(pu, minlength=n_pat).astype(float)
    ps = np.zeros((n_pat, n_bins))
    np.add.at(ps, (pu, b[at]), 1.0 / per_pu[pu])
    p_week = np.zeros(n_pat, dtype=np.int64)
    p_week[pu] = w[at]
    low_share = float(p[0] / (p[0] + p[-1]))
    outside = _indicator_test(ps[:, 0] + ps[:, -1], p_week, 1.0 - outer_level)
    if half is not None:
        central = _indicator_test(ps[:, half - 1] + ps[:, half], p_week, central_level)
        below = _indicator_test(ps[:, :half].sum(axis=1), p_week, float(p[:half].sum()))
    else:
        central = below = _indicator_test(np.zeros(0), p_week[:0], 0.5)
    missed = (ps[:, 0] + ps[:, -1]) > _TOL
    miss_low = np.divide(ps[missed, 0], ps[missed, 0] + ps[missed, -1])
    side = _indicator_test(miss_low, p_week[missed], low_share)
    narrow = (outside.p_greater, "outside")
    wide = min((outside.p_less, "outside"), (central.p_greater, "central"), key=_p_key)
    counts = {
        "misses_below": _whole(float(ps[:, 0].sum())),
        "misses_above": _whole(float(ps[:, -1].sum())),
    }
    counts["outside"] = counts["misses_below"] + counts["misses_above"]

    decision = _Decision(
        level=float(test_level),
        n_units=n_units,
        n_pattern=n_pat,
        horizon=h_min,
        outer=_pct(outer_level),
        central=_pct(central_level) if half is not None else "",
        outside=outside,
        central_test=central,
        below=below,
        side=side,
        low_share=low_share,
        counts=counts,
    )
    ok = (cal >= test_level if math.isfinite(cal) else False) if passes is None else passes
    verdict, why = decision.decide(
        rated=rated and n_units > 0, passes=bool(ok), narrow=narrow, wide=wide
    )
    return Verdict(
        verdict=verdict,
        explanation=why,
        n_items=int(b.size),
        n_evidence=n_units,
        n_weeks=n_weeks,
        design_effect=float(deff),
        n_effective=float(n_units / deff) if n_units else 0.0,
        calibration_p=cal,
        shares=tuple(float(x) for x in eff),
        pattern_horizon=h_min,
        n_pattern=n_pat,
        outer_level=outer_level,
        central_level=central_level,
        outside=counts["outside"],
        expected_outside=float(outside.expected),
        below=below.count,
        expected_below=float(below.expected),
        inside_central=central.count,
        expected_inside_central=float(central.expected),
        misses_below=counts["misses_below"],
        misses_above=counts["misses_above"],
        bias_p=below.p_two,
        narrow_p=narrow[0],
        wide_p=wide[0],
        misses_side_p=side.p_two,
        outside_deff=outside.deff,
        central_deff=central.deff,
        below_deff=below.deff,
        side_deff=side.deff,
    )


def _p_key(x: tuple[float, str]) -> float:
    return x[0] if math.isfinite(x[0]) else math.inf


def _sig(p: float, level: float) -> bool:
    return bool(math.isfinite(p) and p < level)


@dataclass(frozen=True)
class _Decision:
    """The verdict rules of the module docstring, and the sentence that cites the counts."""

    level: float
    n_units: int
    n_pattern: int
    horizon: int
    outer: str
    central: str
    outside: _Test
    central_test: _Test
    below: _Test
    side: _Test
    low_share: float
    counts: dict[str, int]

    def _ahead(self) -> str:
        return f"{self.horizon}-week-ahead " if self.horizon > 0 else ""

    def _weeks(self, n: int) -> str:
        return f"{n} target week" + ("" if n == 1 else "s")

    def _note(self, deff: float, n: float) -> str:
        if deff < _NOTE_DEFF:
            return ""
        return (
            f"; regions moved together, so the test counts this as about {_whole(n)} "
            "independent target weeks"
        )

    def _outside_text(self) -> str:
        return (
            f"for {self.counts['outside']} of {self._weeks(self.n_pattern)} the "
            f"observation fell outside its {self._ahead()}{self.outer} range "
            f"(about {_whole(self.outside.expected)} expected)"
        )

    def decide(
        self, *, rated: bool, passes: bool, narrow: tuple[float, str], wide: tuple[float, str]
    ) -> tuple[VerdictName, str]:
        if not rated:
            return "not yet rated", "too little history to judge yet"
        if passes:
            return (
                "reliable",
                f"its ranges held about as often as they should: {self._outside_text()}",
            )
        bias = _sig(self.below.p_two, self.level)
        spread_p, basis = min((narrow[0], "narrow"), (wide[0], "wide"), key=_p_key)
        spread = _sig(spread_p, self.level)
        high = self.below.count > self.below.expected  # below the median: forecasts too high
        on_side = self.counts["misses_below" if high else "misses_above"]
        share = self.low_share if high else 1.0 - self.low_share
        # "most misses on one side": significant, and at least 3 in 4 of them (our convention)
        one_sided = (
            _sig(self.side.p_two, self.level)
            and on_side > share * self.counts["outside"]
            and on_side >= _MOST * self.counts["outside"]
        )
        if bias and (not spread or one_sided):
            side = "below" if high else "above"
            k = self.below.count if high else self.n_pattern - self.below.count
            missed = self.counts["misses_below"] if high else self.counts["misses_above"]
            of = "all" if missed == self.counts["outside"] else f"{missed} of"
            misses = (
                f", and {of} its {self.counts['outside']} misses of the {self.outer} "
                f"range were {side} it"
                if self.counts["outside"]
                else ""
            )
            return ("biased high" if high else "biased low"), (
                f"its forecasts sat too {'high' if high else 'low'}: for {k} of "
                f"{self._weeks(self.n_pattern)} the observation fell {side} its "
                f"{self._ahead()}median (about {_whole(self.below.expected)} "
                f"expected){misses}{self._note(self.below.deff, self.n_pattern / self.below.deff)}"
            )
        if spread:
            test = (narrow if basis == "narrow" else wide)[1]
            if test == "central":
                t = self.central_test
                text = (
                    f"for {t.count} of {self._weeks(self.n_pattern)} the observation fell "
                    f"inside its {self._ahead()}{self.central} range (about "
                    f"{_whole(t.expected)} expected)"
                )
            else:
                t = self.outside
                text = self._outside_text()
            note = self._note(t.deff, self.n_pattern / t.deff)
            if basis == "narrow":
                return "overconfident", f"its ranges were too narrow: {text}{note}"
            return "underconfident", f"its ranges were wider than needed: {text}{note}"
        return "unreliable", (
            "its ranges did not hold as often as they should over "
            f"{self._weeks(self.n_units)}, with no single clear pattern"
        )
