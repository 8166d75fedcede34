"""The briefing's text: every number comes from the facts, and the wording follows guidance.

Guidance checked (docs/conventions.md §4): IPCC calibrated language reserves "likely" for a
probability of at least 66% (Mastrandrea et al. 2010, IPCC AR5 guidance note), so a 50% range
is never "likely"; a verbal term goes with its number (Budescu et al. 2014, Nat. Clim. Change
4:508-512); probabilities are given as frequencies (Spiegelhalter 2017, Annu. Rev. Stat. Appl.
4:31-60); the standard cautions are printed every week (Funk et al. 2019, PLOS Comput. Biol.;
WHO ERC guideline 2017).
"""

from __future__ import annotations

import dataclasses
import re
from collections.abc import Iterator
from typing import Any

import numpy as np
import pandas as pd
import pytest
from scipy.stats import norm

from forebrief.app.config import BriefingConfig, Threshold, load_config
from forebrief.app.weekly import BriefingRun, run_briefing
from forebrief.app.workflow import load_inputs
from forebrief.demo import generate_scenario, write_scenario
from forebrief.report.facts import CAUTIONS, BriefingFacts
from forebrief.report.narrative import build_narrative, narrative_text

MONTHS = "January|February|March|April|May|June|July|August|September|October|November|December"
# one number as a reader sees it; longest forms first
NUMBER = re.compile(
    r"\d{4}-\d{2}-\d{2}"  # ISO date
    rf"|\d{{1,2}} (?:{MONTHS}) \d{{4}}"  # 5 December 2026
    r"|\d+\.\d+\.\d+"  # a version
    r"|\d+ in \d+"  # a frequency: 9 in 10
    r"|\d{1,3}(?:,\d{3})+(?:\.\d+)?%?"  # 1,240
    r"|\d+(?:\.\d+)?%?"  # 12, 0.77, 31%
)
# Fixed names, not computed numbers: the two ranges the briefing shows (the 5-95% and 25-75%
# quantile ranges, called "the 9 in 10 range" / "90% range" and "50% range") and the unit of
# the rates ("per 100,000 residents").
FIXED_LABELS = {"9 in 10", "90%", "50%", "100,000"}
STATISTIC_NAMES = (
    "calibration",
    "wis",
    "weighted interval",
    "quantile",
    "information score",
    "classical model",
    "linear pool",
    "relative",
    "p-value",
    "coverage",
    "crps",
    "interval score",
)
IPCC_TERMS = re.compile(
    r"\b(virtually certain|(?:very |extremely |exceptionally )?"
    r"(?:un)?likely|about as likely as not|probabl[ey])\b",
    re.IGNORECASE,
)


def numbers(text: str) -> list[str]:
    return NUMBER.findall(text)


def _flatten(value: Any) -> Iterator[Any]:
    if isinstance(value, dict):
        for k, v in value.items():
            yield k
            yield from _flatten(v)
    elif isinstance(value, list | tuple):
        for v in value:
            yield from _flatten(v)
    else:
        yield value


def fact_tokens(facts: BriefingFacts) -> set[str]:
    """Every value of the facts as text, and every number inside the facts' texts."""
    out: set[str] = set()
    for v in _flatten(facts.to_dict()):
        if isinstance(v, bool) or v is None:
            continue
        if isinstance(v, int | float | np.integer | np.floating):
            x = float(v)
            out.add(str(v))
            if x.is_integer():
                out.update({str(int(x)), f"{int(x):,}"})
        elif isinstance(v, str):
            out.add(v)
            out.update(numbers(v))
    # the methods note names the configured quantile levels as percentages
    out.update(f"{lv * 100:g}" for lv in facts.methods.get("levels", []))
    out.update(f"{lv * 100:g}%" for lv in facts.methods.get("levels", []))
    return out


def sentences(text: str) -> list[str]:
    """The text's sentences and list items, with line wrapping undone."""
    out = []
    for block in re.split(r"\n\s*\n|\n(?=- )|\n[-=]{3,}\n", text):
        flat = " ".join(block.split())
        out.extend(s for s in re.split(r"(?<=[.!?])\s+(?=[A-Z\"(-])", flat) if s)
    return out


def stray_numbers(text: str, facts: BriefingFacts) -> list[tuple[str, str]]:
    allowed = fact_tokens(facts) | FIXED_LABELS
    return [(n, s) for s in sentences(text) for n in numbers(s) if n not in allowed]


# --------------------------------------------------------------------------------------------
# two briefings: the demo, and a small case with no history, no total and no populations


@pytest.fixture(scope="module")
def demo_run(tmp_path_factory: pytest.TempPathFactory) -> BriefingRun:
    folder = tmp_path_factory.mktemp("demo")
    write_scenario(generate_scenario(), folder)
    cfg = load_config(folder / "forebrief.toml")
    inputs = load_inputs(cfg.forecasts, cfg.observations, columns=cfg.columns, signed=cfg.signed)
    return run_briefing(cfg, inputs)


@pytest.fixture(scope="module")
def first_run(tmp_path_factory: pytest.TempPathFactory) -> BriefingRun:
    folder = tmp_path_factory.mktemp("first")
    levels = np.round(np.arange(0.01, 0.995, 0.01), 2)
    rows = [
        (model, region, "cases", "2026-03-02", week, lv, scale * (mu + sd * norm.ppf(lv)))
        for model, (mu, sd) in {"alder-team": (110.0, 20.0), "birch-team": (150.0, 25.0)}.items()
        for region, scale in (("larchfield", 1.0), ("oakmere", 2.5))
        for week in ("2026-03-07", "2026-03-14")
        for lv in levels
    ]
    pd.DataFrame(
        rows, columns=["model", "region", "quantity", "issued", "week_ending", "level", "value"]
    ).to_csv(folder / "forecasts.csv", index=False)
    pd.DataFrame(
        {
            "region": ["larchfield", "oakmere"],
            "quantity": ["cases", "cases"],
            "week_ending": ["2026-02-28"] * 2,
            "value": [118, 290],
        }
    ).to_csv(folder / "observations.csv", index=False)
    cfg = BriefingConfig(
        forecasts=(folder / "forecasts.csv",),
        observations=(folder / "observations.csv",),
        horizons=(1, 2),
        thresholds=(Threshold("oakmere", "cases", 420.0, "surge line"),),
    )
    return run_briefing(cfg, load_inputs(cfg.forecasts, cfg.observations))


RUNS = [
    pytest.param("demo_run", marks=pytest.mark.slow, id="demo"),
    pytest.param("first_run", id="first"),
]


@pytest.fixture(params=RUNS)
def run(request: pytest.FixtureRequest) -> BriefingRun:
    return request.getfixturevalue(request.param)


# --------------------------------------------------------------------------------------------
# numbers


def test_the_number_check_catches_a_computed_number(demo_run: BriefingRun) -> None:
    # adding up the regions' medians is exactly what the text must never do
    facts = demo_run.facts
    tokens = fact_tokens(facts)
    sums = []
    for q in facts.quantities:
        for h in facts.horizons:
            total = sum(
                o.median
                for o in facts.outlook
                if not o.is_total and o.quantity == q["id"] and o.horizon == h
            )
            sums.append(f"{total:,.0f}")
    absent = [x for x in sums if x not in tokens]
    assert absent  # (a sum can equal some fact by chance; most do not)
    summed = absent[0]
    text = demo_run.text + f"\nIn all, about {summed} admissions are expected.\n"
    assert stray_numbers(text, facts) == [
        (summed, f"In all, about {summed} admissions are expected.")
    ]


def test_the_tokenizer_reads_every_form_of_number() -> None:
    got = numbers(
        "On 5 December 2026 (2026-12-05) about 1,240 (9 in 10 chance: 64 to 200), "
        "31% smaller, error 0.77 times, 7.6 per 100,000; forebrief 0.1.0."
    )
    assert got == [
        "5 December 2026",
        "2026-12-05",
        "1,240",
        "9 in 10",
        "64",
        "200",
        "31%",
        "0.77",
        "7.6",
        "100,000",
        "0.1.0",
    ]


def test_every_number_in_the_text_comes_from_the_facts(run: BriefingRun) -> None:
    assert numbers(run.text)  # the check below has something to check
    assert stray_numbers(run.text, run.facts) == []


def test_the_text_is_the_narrative_of_the_facts(run: BriefingRun) -> None:
    assert run.text == narrative_text(run.facts)
    assert run.narrative == build_narrative(run.facts)


def test_the_methods_note_names_the_configured_levels(first_run: BriefingRun) -> None:
    facts = dataclasses.replace(
        first_run.facts,
        methods={
            **first_run.facts.methods,
            "levels": [0.1, 0.5, 0.9],
            "levels_text": "10, 50 and 90%",
        },
    )
    methods = next(s for s in build_narrative(facts).sections if s.key == "methods")
    text = " ".join(methods.paragraphs)
    assert "95%" not in text
    assert "10" in numbers(text)
    assert "90%" in numbers(text)


# --------------------------------------------------------------------------------------------
# wording


def _fifty_sentences(run: BriefingRun) -> list[str]:
    """Sentences that state a 50% range: by name, or by its two ends."""
    ends = [(o.range50_low_text, o.range50_high_text) for o in run.facts.outlook]
    out = []
    for s in sentences(run.text):
        if (
            "50%" in s
            or "even chance" in s
            or any(
                re.search(rf"\b{re.escape(lo)}\b.{{1,20}}\b{re.escape(hi)}\b", s) for lo, hi in ends
            )
        ):
            out.append(s)
    return out


@pytest.mark.slow
def test_a_50_percent_range_is_never_called_likely(demo_run: BriefingRun) -> None:
    fifty = _fifty_sentences(demo_run)
    assert fifty  # the text does state 50% ranges
    for s in fifty:
        assert not IPCC_TERMS.search(s), s


def test_every_50_percent_range_is_named_as_such(demo_run: BriefingRun) -> None:
    # the text gives a 50% range only as "an even chance of between X and Y"
    for o in demo_run.facts.outlook:
        phrase = f"between {o.range50_low_text} and {o.range50_high_text}"
        for s in sentences(demo_run.text):
            if phrase in s:
                assert f"an even chance of {phrase}" in s, s


def test_verbal_probability_terms_come_with_their_number(run: BriefingRun) -> None:
    bare = [
        (m.group(0), s)
        for s in sentences(run.text)
        for m in IPCC_TERMS.finditer(s)
        if not re.search(r"\d+%|\d+ in \d+", s)
    ]
    assert bare == []


@pytest.mark.parametrize(
    ("sentence", "term"),
    [
        ("Admissions will likely rise.", "likely"),
        ("It is very unlikely.", "very unlikely"),
        ("This is about as likely as not.", "about as likely as not"),
        ("Deaths will probably fall.", "probably"),
    ],
)
def test_the_term_pattern_finds_ipcc_terms(sentence: str, term: str) -> None:
    assert IPCC_TERMS.search(sentence).group(0) == term  # type: ignore[union-attr]


def test_probabilities_are_given_as_frequencies(demo_run: BriefingRun) -> None:
    h1 = demo_run.facts.summary["horizon"]
    texts = {
        o.p_above_threshold_text
        for o in demo_run.facts.outlook
        if o.p_above_threshold is not None
        and o.p_above_threshold >= 0.1
        and o.horizon == h1
        and not o.is_total
    }
    # the headline's alert-line chance (one or two weeks ahead) is always printed
    risk = demo_run.facts.summary["top_risk"]
    texts |= {
        o.p_above_threshold_text
        for o in demo_run.facts.outlook
        if risk
        and (o.region, o.quantity, o.horizon) == (risk["region"], risk["quantity"], risk["horizon"])
    }
    assert texts
    flat = " ".join(demo_run.text.split())
    for t in texts:
        assert re.fullmatch(r"(about|less than|more than) \d+ in (10|20)", t)
        assert t in flat


def test_the_headline_has_three_sentences_and_no_statistic_names(run: BriefingRun) -> None:
    headline = run.narrative.headline
    assert len(headline) == 3
    for s in headline:
        assert len(sentences(s)) == 1, s
        lower = s.lower()
        for name in STATISTIC_NAMES:
            assert not re.search(rf"\b{name}\b", lower), (name, s)
    # the headline opens the briefing, after the title block
    flat = " ".join(run.text.split())
    assert " ".join(" ".join(headline).split()) in flat
    body = run.text.split("\n\n", 1)[1]
    assert " ".join(body.split("\n\n", 1)[0].split()) == " ".join(" ".join(headline).split())


def test_every_caution_is_in_the_text(run: BriefingRun) -> None:
    flat = " ".join(run.text.split())
    assert run.facts.cautions == CAUTIONS
    for caution in CAUTIONS:
        assert caution in flat


def test_the_contact_and_versions_are_given(demo_run: BriefingRun) -> None:
    # docs/conventions.md §4, caution 6: a contact, and the model and data versions
    facts = demo_run.facts
    flat = " ".join(demo_run.text.split())
    assert f"Contact: {facts.contact}" in flat
    assert f"forebrief {facts.tool_version}" in flat
    assert f"Data as of {facts.data_as_of_text}" in flat


def test_no_total_is_explained_when_there_is_none(first_run: BriefingRun) -> None:
    assert not first_run.facts.total_available
    assert first_run.facts.total_note in " ".join(first_run.text.split())


def test_lines_fit_78_columns(run: BriefingRun) -> None:
    assert max(len(line) for line in run.text.splitlines()) <= 78
