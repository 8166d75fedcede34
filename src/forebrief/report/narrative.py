"""Plain-language sentences from the facts: the briefing's text, also the e-mail's text part.

Every number in the text is a value already formatted in :class:`forebrief.report.facts.BriefingFacts`;
this module only chooses and places them. Wording follows published guidance on communicating
uncertainty: a probability is given as a number or frequency ("a 9 in 10 chance of between ...")
(Spiegelhalter 2017, Annu. Rev. Stat. Appl. 4:31-60), a 50% range is called "an even chance",
never "likely" (IPCC calibrated language reserves "likely" for >= 66%: Mastrandrea et al. 2010),
and the headline avoids the names of statistics; those are explained in the methods note.
"""

from __future__ import annotations

import textwrap
from collections.abc import Iterable
from dataclasses import dataclass

from forebrief.report.facts import BriefingFacts, ModelVerdict, OutlookRow

__all__ = ["Narrative", "Section", "build_narrative", "narrative_text"]


@dataclass(frozen=True)
class Section:
    """One titled part of the briefing: paragraphs, and optionally bullet items."""

    key: str
    title: str
    paragraphs: tuple[str, ...] = ()
    bullets: tuple[str, ...] = ()


@dataclass(frozen=True)
class Narrative:
    headline: tuple[str, ...]
    sections: tuple[Section, ...]


def _weeks(h: int) -> str:
    return "next week" if h == 1 else f"{h} weeks ahead"


def _row(facts: BriefingFacts, ref: dict | None) -> OutlookRow | None:
    if not ref:
        return None
    for o in facts.outlook:
        if (o.region, o.quantity, o.horizon) == (ref["region"], ref["quantity"], ref["horizon"]):
            return o
    return None


def _unit(o: OutlookRow) -> str:
    return o.quantity_name.lower()


def _last_text(o: OutlookRow) -> str:
    prov = " (provisional, may be revised upward)" if o.last_provisional else ""
    return f"{o.last_value_text}{prov}"


_FROM = {"up": "up from", "down": "down from", "about the same": "about the same as"}


def _change_phrase(o: OutlookRow, *, short: bool = False) -> str:
    if o.last_value_nowcast_text is not None:
        # compare with the week's expected complete count, not with its provisional report;
        # the short form (the headline) leaves the nowcast's range to the outlook paragraph
        spread = "" if short else f"9 in 10 chance: {o.last_value_nowcast_range90_text}; "
        return (
            f"{_FROM.get(o.direction, 'against')} about {o.last_value_nowcast_text} "
            f"expected for the week ending {o.last_week_text} once late reports are in "
            f"({spread}{o.last_value_text} reported so far)"
        )
    if o.direction == "up":
        return f"up from {_last_text(o)} in the week ending {o.last_week_text}"
    if o.direction == "down":
        return f"down from {_last_text(o)} in the week ending {o.last_week_text}"
    if o.direction == "about the same":
        return f"about the same as the {_last_text(o)} of the week ending {o.last_week_text}"
    return "with no recent observation to compare"


def _range90(o: OutlookRow) -> str:
    return f"a 9 in 10 chance of between {o.range90_low_text} and {o.range90_high_text}"


def _range50(o: OutlookRow) -> str:
    return f"an even chance of between {o.range50_low_text} and {o.range50_high_text}"


def _headline(facts: BriefingFacts) -> tuple[str, ...]:
    summ = facts.summary
    out: list[str] = []
    focus = _row(facts, summ.get("focus"))
    if focus is not None:
        scope = f"Across {facts.jurisdiction}" if focus.is_total else f"In {focus.region_name}"
        caveat = _coverage_caveat(facts, focus.quantity)
        out.append(
            f"{scope}, {_unit(focus)} are expected to be about {focus.median_text} in the week "
            f"ending {focus.week_ending_text}, {_change_phrase(focus, short=True)}, with "
            f"{_range90(focus)}"
            f"{caveat}."
        )
    else:
        out.append("No combined forecast could be made for this week.")
    risk = _row(facts, summ.get("top_risk"))
    if (
        risk is not None
        and risk.p_above_threshold is not None
        and risk.p_above_threshold_text is not None
        and risk.p_above_threshold < 0.05
    ):
        out.append(
            f"No region is expected to pass its {risk.threshold_label} in the next two weeks: "
            f"the highest chance, {risk.p_above_threshold_text}, is in {risk.region_name} "
            f"(the week ending {risk.week_ending_text})."
        )
    elif risk is not None and risk.p_above_threshold_text is not None:
        out.append(
            f"{risk.region_name} has the highest chance of passing its {risk.threshold_label} "
            f"of {risk.threshold_text} {_unit(risk)}: {risk.p_above_threshold_text} in the "
            f"week ending {risk.week_ending_text}."
        )
    elif focus is not None:
        level = (
            "last week's expected complete count"
            if focus.last_value_nowcast_text
            else "last week's level"
        )
        out.append(
            f"The chance that {_unit(focus)} rise above {level} is {focus.p_above_last_text}."
        )
    lead_q = summ.get("lead_quantity")
    track = (summ.get("track") or {}).get(lead_q)
    models = (summ.get("models") or {}).get(lead_q)
    if models is not None and models["n_models"] == 0:
        out.append(
            "No model has a record yet, so none can be rated; the combined forecast "
            "weights every model equally."
        )
    elif track is not None and models is not None:
        verdict = (
            "was more accurate than" if track["beats_baseline"] else "was not more accurate than"
        )
        out.append(
            f'In recent weeks the {track["label"]} {verdict} simply assuming "same as last '
            f'week" ({track["vs_baseline_text"]}), and {models["n_reliable"]} of '
            f"{models['n_models']} models have earned a reliable rating."
        )

    elif models is not None:
        out.append(
            f"{models['n_reliable']} of {models['n_models']} models have earned a "
            "reliable rating; there is no track record of the combined forecast yet."
        )
    return tuple(out)


def _horizons_text(hs: list[int]) -> str:
    words = [f"{h} weeks ahead" for h in hs]
    return words[0] if len(words) == 1 else ", ".join(words[:-1]) + " and " + words[-1]


def _coverage_caveat(facts: BriefingFacts, quantity: str) -> str:
    """', though its 9 in 10 ranges held 7 in 10 times lately' when coverage was off."""
    track = (facts.summary.get("track") or {}).get(quantity) or {}
    warning = track.get("coverage_warning")
    return f" (though {warning})" if warning else ""


def _outlook_section(facts: BriefingFacts) -> Section:
    paras: list[str] = []
    bullets: list[str] = []
    h1 = facts.summary.get("horizon", 1)
    for q in facts.quantities:
        rows = [o for o in facts.outlook if o.quantity == q["id"] and o.horizon == h1]
        if not rows:
            continue
        entry = next((h for h in facts.headline if h.get("quantity") == q["id"]), None)
        if entry is not None and entry.get("sentence"):
            paras.append(str(entry["sentence"]))
        total = next((o for o in rows if o.is_total), None)
        if total is not None:
            text = (
                f"{q['name']}: across {facts.jurisdiction}, about {total.median_text} in the "
                f"week ending {total.week_ending_text}, {_change_phrase(total)}; "
                f"{_range90(total)}{_coverage_caveat(facts, q['id'])}, and "
                f"{_range50(total)}."
            )
            if total.median_rate_text:
                text += (
                    f" That is about {total.median_rate_text} per 100,000 residents "
                    f"(9 in 10 chance: {total.range90_rate_text})."
                )
            later = [
                o for o in facts.outlook if o.quantity == q["id"] and o.is_total and o.horizon > h1
            ]
            if later:
                text += (
                    " Further ahead: "
                    + "; ".join(
                        f"{_weeks(o.horizon)} about {o.median_text} ({o.range90_low_text} to "
                        f"{o.range90_high_text})"
                        for o in later
                    )
                    + "."
                )
                worse = [
                    h
                    for h in (facts.summary.get("worse_than_baseline_horizons") or {}).get(
                        q["id"], []
                    )
                    if h > h1
                ]
                if worse:
                    text += (
                        " In the back-test, at " + _horizons_text(worse) + " this "
                        'combination did worse than simply assuming "same as last '
                        'week", so read those figures as a rough guide only.'
                    )
            paras.append(text)
        for o in rows:
            if o.is_total:
                continue
            last = (
                f"last week about {o.last_value_nowcast_text} expected once late "
                f"reports are in ({o.last_value_text} reported so far)"
                if o.last_value_nowcast_text
                else f"last week {o.last_value_text}"
            )
            line = (
                f"{o.region_name}, {o.quantity_name.lower()}: about {o.median_text} "
                f"(9 in 10 chance: {o.range90_low_text} to {o.range90_high_text}), "
                f"{o.direction if o.direction != 'unknown' else 'no comparison'}; {last}"
            )
            if o.p_above_threshold is not None and o.p_above_threshold >= 0.1:
                line += (
                    f"; {o.p_above_threshold_text} chance of passing the "
                    f"{o.threshold_label} of {o.threshold_text}"
                )
            bullets.append(line + ".")
    if not facts.total_available:
        paras.append(facts.total_note)
    provisional = sorted({o.last_week_text for o in facts.outlook if o.last_provisional})
    if provisional:
        nowcast = any(o.last_value_nowcast_text for o in facts.outlook)
        paras.append(
            "The latest weekly counts (week ending "
            + ", ".join(provisional)
            + ") are provisional and may be revised upward as late reports arrive"
            + (
                '; "expected once late reports are in" is a nowcast from how '
                "complete past weeks were at the same delay."
                if nowcast
                else "."
            )
        )
    return Section("outlook", "Outlook for next week", tuple(paras), tuple(bullets))


def _certainty_section(facts: BriefingFacts) -> Section:
    paras = []
    bullets = []
    for q in facts.quantities:
        rows = sorted(
            (o for o in facts.outlook if o.is_total and o.quantity == q["id"]),
            key=lambda o: o.horizon,
        )
        if not rows:
            continue
        first, last = rows[0], rows[-1]
        text = (
            f"{q['name']}: the 9 in 10 range runs from {first.below_text} to "
            f"{first.above_text} the central estimate {_weeks(first.horizon)}"
        )
        if last is not first:
            verb = (
                "widening to"
                if last.width90_relative > first.width90_relative
                else "narrowing to"
                if last.width90_relative < first.width90_relative
                else "and"
            )
            text += f", {verb} {last.below_text} and {last.above_text} {_weeks(last.horizon)}"
        bullets.append(f"{text}; {first.agreement}.")
    for d in facts.summary.get("dominant", []):
        paras.append(
            f"{d['quantity_name']}: {d['model']} carries most of the weight in "
            f"{d['n_regions']} region(s) ({', '.join(d['regions'])}), so the combined forecast "
            "there depends on it; leaving it out would move the central estimate noticeably."
        )
    h1 = facts.summary.get("horizon", 1)
    disagree = sorted(
        {
            o.region_name
            for o in facts.outlook
            if o.agreement == "the models disagree" and o.horizon == h1
        }
    )
    if disagree:
        paras.append(
            "The models disagree most about " + ", ".join(disagree) + "; the combined "
            "range there is wide for that reason."
        )
    paras.append(
        "Ranges widen the further ahead the forecast looks; beyond two weeks treat "
        "them as a rough guide."
    )
    return Section("certainty", "How sure we are", tuple(paras), tuple(bullets))


def _verdict_line(v: ModelVerdict) -> str:
    if v.weight > 0:
        weight = f"weight {v.weight_text} next week"
    elif v.verdict == "reliable":
        weight = "not used this week: the combined forecast did better with a stricter cutoff"
    else:
        weight = "no weight"
    rel = (
        f"; error {v.relative_wis_text} times the baseline's" if v.relative_wis is not None else ""
    )
    return f"{v.model}: {v.verdict}: {v.explanation} ({weight}{rel})."


def _trust_section(facts: BriefingFacts) -> Section:
    paras: list[str] = []
    bullets: list[str] = []
    for q in facts.quantities:
        models = facts.summary.get("models", {}).get(q["id"])
        if not models:
            continue
        verb = "is" if models["n_reliable"] == 1 else "are"
        paras.append(
            f"{q['name']}: {models['n_reliable']} of {models['n_models']} models {verb} rated "
            "reliable on their recent record."
        )
        bullets.extend(
            f"{q['name']}: {_verdict_line(v)}" for v in facts.verdicts if v.quantity == q["id"]
        )
    return Section("trust", "Which models to trust", tuple(paras), tuple(bullets))


def _track_section(facts: BriefingFacts) -> Section:
    if not facts.track:
        return Section(
            "track",
            'Combined forecast against "same as last week"',
            ("There is no track record yet: no earlier issue date could be back-tested.",),
        )
    h1 = facts.summary.get("horizon", 1)
    bullets = []
    order = {"quantile_median": 0, "weighted_pool": 1, "equal_pool": 2, "recalibrated_pool": 3}
    rows = sorted(
        (t for t in facts.track if t.horizon == h1 and t.method in order),
        key=lambda t: (t.quantity, order[t.method]),
    )
    for t in rows:
        bullets.append(
            f"{t.label}, {t.quantity.replace('_', ' ')} next week: {t.vs_baseline_text}; "
            f"inside its 90% range {t.in_90_text} times and its 50% range {t.in_50_text} times."
        )
    paras = [
        f"Back-test over the last {facts.track_weeks} issue dates, each forecast rebuilt "
        "with only the data known at the time."
    ]
    if facts.settle.get("text"):
        paras.append(str(facts.settle["text"]))
    for tt in facts.track_total:
        paras.append(
            f"For {facts.jurisdiction} as a whole, {tt['quantity_name'].lower()} fell "
            f"inside the combined forecast's 90% range {tt['in_90_text']}."
        )
    return Section(
        "track", 'Combined forecast against "same as last week"', tuple(paras), tuple(bullets)
    )


def _changes_section(facts: BriefingFacts) -> Section:
    ch = facts.changes
    if not ch.get("previous_issued"):
        return Section(
            "changes",
            "What changed",
            ("This is the first briefing in the archive, so there is nothing to compare with.",),
        )
    bullets = []
    for c in ch.get("outlook", []):
        bullets.append(
            f"{c['region_name']}, {c['quantity_name'].lower()} for the week ending "
            f"{c['week_ending_text']}: revised {c['direction']} from "
            f"{c['before_text']} to {c['now_text']}."
        )
    for c in ch.get("verdicts", []):
        bullets.append(
            f"{c['model']} ({c['quantity_name'].lower()}): was {c['before']}, now {c['now']}."
        )
    for w in ch.get("weights", []):
        bullets.append(
            f"{w['model']} ({w['quantity_name'].lower()}, {_weeks(w['horizon'])}): weight "
            f"{w['before_text']} to {w['now_text']}."
        )
    para = (
        f"Compared with the briefing of {ch['previous_issued_text']}."
        if bullets
        else f"Nothing material changed since the briefing of {ch['previous_issued_text']}."
    )
    return Section("changes", "What changed", (para,), tuple(bullets))


def _data_section(facts: BriefingFacts) -> Section:
    d = facts.data_notes
    bullets = []
    for qn in d.get("quarantined", []):
        who = f"{qn['model']}: " if qn["model"] else ""
        bullets.append(
            f"{who}{qn['count']} {qn['kind']}(s) set aside from {qn['file']} "
            f"({'; '.join(qn['reasons'])})."
        )
    if d.get("missing_teams"):
        bullets.append("No forecast this week from: " + ", ".join(d["missing_teams"]) + ".")
    if d.get("new_teams"):
        bullets.append("New this week: " + ", ".join(d["new_teams"]) + " (not yet rated).")
    if d.get("revised"):
        bullets.append(
            f"{d['n_revised']} earlier weekly count(s) were revised since the last "
            f"briefing, {d['n_revised_up']} of them upward."
        )
    for s in d.get("short_history", []):
        bullets.append(f"{s['region_name']} ({s['quantity']}): only {s['weeks']} weeks of data.")
    paras = [f"Data as of {facts.data_as_of_text}; the latest weeks are provisional."]
    if facts.settle.get("text"):
        paras.append(str(facts.settle["text"]))
    if not bullets:
        paras.append("No submissions were set aside.")
    return Section("data", "Data notes", tuple(paras), tuple(bullets))


def _methods_section(facts: BriefingFacts) -> Section:
    m = facts.methods
    alpha = m.get("alpha")
    alpha_text = (
        "chosen each week to give the combined forecast the best record"
        if alpha == "auto"
        else f"fixed at {alpha}"
    )
    paras = (
        f"Models are rated with Cooke's Classical Model: each model's {m.get('levels_text')} "
        f"quantiles over the last {m.get('window_weeks')} weeks of observed targets give a "
        "calibration score (a test of whether observations fall in each range as often as "
        "they should) and an information score (how narrow its ranges are). 'Reliable' means "
        f"the calibration test passes at the {m.get('verdict_test_level')} level, counting "
        "each region and target week once however many weeks ahead it was forecast, not "
        "counting the jurisdiction total on top of its regions, and allowing for regions that "
        "move together; a one-sided pattern is named a bias before it is called "
        "overconfidence.",
        "The combined forecast is a linear pool (a mixture) of the models' forecast "
        "distributions, weighted by calibration times information, with models below a "
        f"calibration cutoff ({alpha_text}) left out. Accuracy is the weighted interval score, "
        "and 'error N times the baseline's' is its relative value against the persistence "
        '("same as last week") forecast, each pair of forecasts compared on the quantile '
        "levels both give.",
        str(m.get("headline_rule_text", "")),
        str(m.get("nowcast_text", "")),
        f"forebrief {facts.tool_version}; issue date {facts.issued}.",
    )
    return Section("methods", "Methods note", tuple(p for p in paras if p))


def build_narrative(facts: BriefingFacts) -> Narrative:
    """Turn the facts into the headline and sections of the briefing."""
    sections = (
        _outlook_section(facts),
        _certainty_section(facts),
        _trust_section(facts),
        _track_section(facts),
        _changes_section(facts),
        _data_section(facts),
        Section("cautions", "Cautions", (), tuple(facts.cautions)),
        _methods_section(facts),
    )
    return Narrative(_headline(facts), sections)


def _wrap(text: str, *, indent: str = "", width: int = 78) -> Iterable[str]:
    return textwrap.wrap(
        text,
        width=width,
        initial_indent=indent,
        subsequent_indent=" " * len(indent),
        break_on_hyphens=False,
    ) or [""]


def narrative_text(facts: BriefingFacts, narrative: Narrative | None = None) -> str:
    """The briefing as plain text (78 columns), for briefing.txt and the e-mail."""
    n = narrative or build_narrative(facts)
    lines = [
        facts.title,
        "=" * len(facts.title),
        f"{facts.jurisdiction}, issued {facts.issued_text}. For {facts.audience}.",
        "",
    ]
    for s in n.headline:
        lines.extend(_wrap(s))
    lines.append("")
    for sec in n.sections:
        lines.extend([sec.title, "-" * len(sec.title)])
        for p in sec.paragraphs:
            lines.extend(_wrap(p))
            lines.append("")
        for b in sec.bullets:
            lines.extend(_wrap(b, indent="- "))
        if sec.bullets:
            lines.append("")
    if facts.contact:
        lines.append(f"Contact: {facts.contact}")
    return "\n".join(lines).rstrip() + "\n"
