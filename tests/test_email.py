"""The briefing e-mail (forebrief.report.render.email): MIME structure, headers, HTML, refusals.

Outside checks, named at each test:
- RFC 2046 (Freed & Borenstein 1996): section 5.1.3 multipart/mixed, 5.1.4 multipart/
  alternative ordered from plainest to richest, 4.1.1 text in canonical form has CRLF line
  breaks;
- RFC 2387 (Levinson 1998) multipart/related, its required ``type`` parameter (section 3.1);
- RFC 2392 (Levinson 1998) ``cid:`` URLs naming a part's Content-ID;
- RFC 5322 (Resnick 2008) header fields (Date, Message-ID, address lists), lines within
  78 characters (section 2.1.1);
- the standard library's own parser (``email.message_from_bytes`` with ``policy.default``)
  and HTML parser (``html.parser``) read back what was written;
- the rendered page is measured in a real browser (headless Chromium through Playwright).
The facts come from a short in-process run of the invented demo scenario.
"""

from __future__ import annotations

import base64
import dataclasses
import datetime as dt
import email
import email.policy
import email.utils
import io
import re
import smtplib
import socket
from collections.abc import Iterator
from html.parser import HTMLParser
from pathlib import Path
from typing import Any

import pytest

from forebrief.app.config import EmailConfig, load_config
from forebrief.app.delivery import recipients_of, send_message
from forebrief.errors import DeliveryError, ForebriefError
from forebrief.report.facts import BriefingFacts
from forebrief.report.narrative import Narrative, build_narrative, narrative_text
from forebrief.report.render.email import EMAIL_WIDTH, build_message, email_chart

CREATED = dt.datetime(2026, 9, 14, 7, 30, tzinfo=dt.UTC)
EMAIL = EmailConfig(
    sender="Forecast desk <desk@health.example>",
    to=("lead@health.example", "Chief Officer <chief@health.example>"),
    cc=("analysts@health.example",),
    subject="{title}: week of {issued}",
)
HOSTILE = "<script>alert(1)</script>"


# --------------------------------------------------------------------------------------------
# fixtures


@dataclasses.dataclass(frozen=True)
class StandInChart:
    """A chart spec with the fields charts.py promises (key, title, caption, alt, svg, png)."""

    key: str
    title: str
    caption: str
    alt: str
    svg: str
    png: bytes
    section: str = "outlook"


def _png(label: str) -> bytes:
    """A small real PNG drawn with matplotlib (A4-column width, low dpi to stay small)."""
    from matplotlib.figure import Figure

    fig = Figure(figsize=(6.85, 3.4))
    ax = fig.add_subplot()
    ax.plot([0, 1, 2, 3], [3, 1, 4, 1], marker="o")
    ax.set_title(label)
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=40, metadata={"Software": None})
    return buf.getvalue()


@pytest.fixture(scope="module")
def run(tmp_path_factory: pytest.TempPathFactory) -> Any:
    """A quick weekly run of the invented demo: submissions up to 2026-09-14, 2 back-test weeks."""
    from forebrief.app.weekly import run_briefing
    from forebrief.app.workflow import load_inputs
    from forebrief.demo import generate_scenario, write_scenario

    folder = tmp_path_factory.mktemp("demo")
    write_scenario(generate_scenario(), folder)
    for path in (folder / "submissions").rglob("*.csv"):
        if path.stem > "2026-09-14":
            path.unlink()
    cfg = dataclasses.replace(load_config(folder / "forebrief.toml"), backtest_weeks=2)
    inputs = load_inputs(cfg.forecasts, cfg.observations, columns=cfg.columns, signed=cfg.signed)
    return run_briefing(cfg, inputs)


@pytest.fixture(scope="module")
def facts(run: Any) -> BriefingFacts:
    return run.facts


@pytest.fixture(scope="module")
def narrative(run: Any) -> Narrative:
    return run.narrative


@pytest.fixture(scope="module")
def charts(facts: BriefingFacts) -> list[StandInChart]:
    q = facts.summary["lead_quantity"]
    return [
        StandInChart(
            f"outlook_{q}",
            "Outlook by region",
            "Small multiples.",
            "Regions.",
            "<svg/>",
            _png("regions"),
        ),
        StandInChart(
            f"fan_{q}_{facts.total_region}",
            "Outlook for the whole jurisdiction",
            "Median with 50% and 90% ranges.",
            "Fan chart: about 1,540 next week.",
            "<svg/>",
            _png("fan"),
        ),
        StandInChart(
            f"reliability_{q}",
            "Trust",
            "Scores.",
            "Reliability.",
            "<svg/>",
            _png("trust"),
            section="trust",
        ),
    ]


PDF = b"%PDF-1.7\n" + bytes(range(256)) * 8 + b"\n%%EOF\n"


def _build(
    facts: BriefingFacts,
    narrative: Narrative,
    charts: Any,
    *,
    pdf: bytes = PDF,
    cfg: EmailConfig = EMAIL,
    created: dt.datetime = CREATED,
) -> bytes:
    return build_message(facts, narrative, charts, pdf, email=cfg, created=created).as_bytes()


def _parse(raw: bytes) -> email.message.EmailMessage:
    msg = email.message_from_bytes(raw, policy=email.policy.default)
    assert isinstance(msg, email.message.EmailMessage)
    return msg


def _tree(part: email.message.Message) -> Any:
    if part.is_multipart():
        return (part.get_content_type(), [_tree(p) for p in part.get_payload()])
    return part.get_content_type()


def _html(msg: email.message.EmailMessage) -> str:
    body = msg.get_body(("html",))
    assert body is not None
    return str(body.get_content())


class _Tags(HTMLParser):
    """Every start tag with its attributes, and the text of each <style> element."""

    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.tags: list[tuple[str, dict[str, str | None]]] = []
        self.styles: list[str] = []
        self.text: list[str] = []
        self._in_style = False

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        self.tags.append((tag, dict(attrs)))
        self._in_style = tag == "style"
        if tag == "style":
            self.styles.append("")

    def handle_endtag(self, tag: str) -> None:
        if tag == "style":
            self._in_style = False

    def handle_data(self, data: str) -> None:
        if self._in_style:
            self.styles[-1] += data
        else:
            self.text.append(data)


def _tags(html: str) -> _Tags:
    p = _Tags()
    p.feed(html)
    p.close()
    return p


# --------------------------------------------------------------------------------------------
# structure


def test_mime_structure_is_mixed_alternative_related_pdf(facts, narrative, charts) -> None:
    # RFC 2046 5.1.3 (mixed), 5.1.4 (alternative: text/plain first, richest last),
    # RFC 2387 (related: the HTML root, then its image)
    msg = _parse(_build(facts, narrative, charts))
    assert _tree(msg) == (
        "multipart/mixed",
        [
            (
                "multipart/alternative",
                ["text/plain", ("multipart/related", ["text/html", "image/png"])],
            ),
            "application/pdf",
        ],
    )
    related = msg.get_payload()[0].get_payload()[1]
    # RFC 2387 section 3.1: "The type parameter must be specified"; it names the root's type
    assert related.get_param("type") == "text/html"
    assert msg["MIME-Version"] == "1.0"


def test_every_cid_reference_has_a_part_with_that_content_id(facts, narrative, charts) -> None:
    # RFC 2392: "cid:" + the Content-ID without its angle brackets
    msg = _parse(_build(facts, narrative, charts))
    html = _html(msg)
    refs = re.findall(r"""src=["']cid:([^"']+)["']""", html)
    parts = {str(p["Content-ID"]).strip("<>"): p for p in msg.walk() if p["Content-ID"]}
    assert refs, "the HTML shows no image"
    assert set(refs) == set(parts)
    fan = email_chart(facts, charts)
    assert fan is not None
    assert fan.key.startswith("fan_")
    image = parts[refs[0]]
    assert image.get_content_type() == "image/png"
    assert image.get_content() == fan.png
    assert image.get_content_disposition() == "inline"
    img = next(a for t, a in _tags(html).tags if t == "img")
    assert img["alt"] == fan.alt


def test_no_data_uri_and_css_inlined_with_media_rules_kept(facts, narrative, charts) -> None:
    html = _html(_parse(_build(facts, narrative, charts)))
    assert "data:" not in html
    parsed = _tags(html)
    # what is left in <style> is only at-rules (@media), everything else was inlined
    assert parsed.styles, "the @media rules were dropped"
    for css in parsed.styles:
        without_media = re.sub(r"@media[^{]*\{(?:[^{}]*\{[^{}]*\})*[^{}]*\}", "", css)
        assert without_media.strip() == "", f"styling left only in <style>: {without_media!r}"
    assert any("@media" in css for css in parsed.styles)
    assert not any(t == "link" for t, _ in parsed.tags)  # no stylesheet to fetch
    styled = {t for t, a in parsed.tags if a.get("style")}
    assert {"body", "table", "td", "th", "h1", "h2", "p", "img"} <= styled
    masthead = next(a for t, a in parsed.tags if "masthead" in (a.get("class") or ""))
    assert "#1d2a3a" in (masthead["style"] or "")  # the briefing's ink colour, inlined
    assert 'class="cautions"' in html
    assert "#8a5a00" in html


def test_layout_is_one_600px_presentation_table(facts, narrative, charts) -> None:
    parsed = _tags(_html(_parse(_build(facts, narrative, charts))))
    containers = [
        a for t, a in parsed.tags if t == "table" and "container" in (a.get("class") or "")
    ]
    assert len(containers) == 1
    c = containers[0]
    assert c["role"] == "presentation"
    assert c["width"] == str(EMAIL_WIDTH) == "600"
    assert "max-width: 600px" in (c["style"] or "")
    layout = [a for t, a in parsed.tags if t == "table" and "data" not in (a.get("class") or "")]
    assert all(a.get("role") == "presentation" for a in layout)
    # data tables keep their header cells for screen readers
    assert any(t == "th" and a.get("scope") == "row" for t, a in parsed.tags)
    img = next(a for t, a in parsed.tags if t == "img")
    assert int(img["width"] or 0) <= 600
    assert int(img["height"] or 0) > 0


def test_summary_shows_headline_outlook_chart_cautions_and_points_to_the_pdf(
    facts, narrative, charts
) -> None:
    html = _html(_parse(_build(facts, narrative, charts)))
    text = " ".join(" ".join(_tags(html).text).split())
    for sentence in narrative.headline:
        assert " ".join(sentence.split()) in text
    for caution in facts.cautions:
        assert caution in text
    h1 = facts.summary["horizon"]
    for o in facts.outlook:
        if o.horizon == h1:  # every number from the facts' own texts
            assert o.region_name in text
            assert o.median_text in text
            assert o.range90_text in text
    assert f"briefing-{facts.issued}.pdf" in text
    assert "Which models to trust" in text  # the PDF's further sections are listed


# --------------------------------------------------------------------------------------------
# parts and headers


def test_text_part_is_the_narrative_text(facts, narrative, charts) -> None:
    msg = _parse(_build(facts, narrative, charts))
    plain = msg.get_payload()[0].get_payload()[0]
    assert plain.get_content_type() == "text/plain"
    # RFC 2046 4.1.1: in canonical form text lines end in CRLF
    assert plain.get_content().replace("\r\n", "\n") == narrative_text(facts, narrative)


def test_pdf_attachment_bytes_equal_the_input(facts, narrative, charts) -> None:
    msg = _parse(_build(facts, narrative, charts))
    attachments = list(msg.iter_attachments())
    assert [a.get_content_type() for a in attachments] == ["application/pdf"]
    assert attachments[0].get_filename() == f"briefing-{facts.issued}.pdf"
    assert attachments[0].get_content_disposition() == "attachment"
    assert attachments[0].get_content() == PDF


def test_headers_subject_from_template_addresses_date_message_id(facts, narrative, charts) -> None:
    raw = _build(facts, narrative, charts)
    msg = _parse(raw)
    assert msg["Subject"] == f"{facts.title}: week of {facts.issued_text}"
    assert facts.issued_text in msg["Subject"]
    assert [a.addr_spec for a in msg["From"].addresses] == ["desk@health.example"]
    assert msg["From"].addresses[0].display_name == "Forecast desk"
    assert [a.addr_spec for a in msg["To"].addresses] == [
        "lead@health.example",
        "chief@health.example",
    ]
    assert [a.addr_spec for a in msg["Cc"].addresses] == ["analysts@health.example"]
    assert "Bcc" not in msg
    assert email.utils.parsedate_to_datetime(msg["Date"]) == CREATED
    mid = str(msg["Message-ID"])
    # RFC 5322 3.6.4 msg-id: "<" id-left "@" id-right ">"; ours: issue date, time, hash
    assert re.fullmatch(r"<2026-09-14\.20260914073000\.[0-9a-f]{8}@health\.example>", mid)
    assert recipients_of(raw) == (
        "lead@health.example",
        "chief@health.example",
        "analysts@health.example",
    )
    # RFC 5322 2.1.1: lines SHOULD be at most 78 characters; MUST at most 998
    assert max(len(line) for line in raw.split(b"\r\n")) <= 78
    assert b"\n" not in raw.replace(b"\r\n", b"")  # CRLF everywhere (RFC 5322 2.1)
    assert raw.isascii()  # 7-bit clean: any server can carry it


def test_message_id_domain_falls_back_when_the_sender_has_an_address_literal(
    facts, narrative, charts
) -> None:
    cfg = dataclasses.replace(EMAIL, sender="desk@[192.0.2.1]")
    msg = _parse(_build(facts, narrative, charts, cfg=cfg))
    assert str(msg["Message-ID"]).endswith("@forebrief.invalid>")


def test_same_inputs_give_the_same_bytes(facts, narrative, charts) -> None:
    a = _build(facts, narrative, charts)
    assert _build(facts, narrative, list(charts)) == a
    later = _build(facts, narrative, charts, created=CREATED + dt.timedelta(minutes=1))
    assert later != a
    assert _parse(later)["Message-ID"] != _parse(a)["Message-ID"]
    other_pdf = _build(facts, narrative, charts, pdf=PDF + b"x")
    assert _parse(other_pdf)["Message-ID"] != _parse(a)["Message-ID"]  # content hash


def test_naive_created_is_taken_as_utc(facts, narrative, charts) -> None:
    naive = _build(facts, narrative, charts, created=CREATED.replace(tzinfo=None))
    assert naive == _build(facts, narrative, charts)


def test_without_charts_the_html_part_stands_alone(facts, narrative) -> None:
    msg = _parse(_build(facts, narrative, []))
    assert _tree(msg) == (
        "multipart/mixed",
        [("multipart/alternative", ["text/plain", "text/html"]), "application/pdf"],
    )
    assert "cid:" not in _html(msg)


def test_first_outlook_chart_when_there_is_no_total_fan(facts, narrative, charts) -> None:
    no_fan = [c for c in charts if not c.key.startswith("fan_")]
    chosen = email_chart(facts, no_fan)
    assert chosen is not None
    assert chosen.key.startswith("outlook_")
    only_trust = [c for c in charts if c.key.startswith("reliability_")]
    assert email_chart(facts, only_trust) is None


def test_the_fan_drawn_for_the_mail_is_preferred(facts, narrative, charts) -> None:
    q = facts.summary["lead_quantity"]
    own = StandInChart(
        f"email_fan_{q}_{facts.total_region}",
        "Outlook for the whole jurisdiction",
        "Median with 50% and 90% ranges.",
        "Fan chart: about 1,540 next week.",
        "<svg/>",
        _png("fan for the mail"),
        section="email",
    )
    assert email_chart(facts, [*charts, own]) is own
    assert email_chart(facts, [own, *charts]) is own
    # the built message inlines that PNG, not the A4-column fan's
    msg = _parse(_build(facts, narrative, [*charts, own]))
    inline = [p.get_content() for p in msg.walk() if p.get_content_type() == "image/png"]
    assert inline == [own.png]


# --------------------------------------------------------------------------------------------
# hostile values and refusals


def test_hostile_names_are_escaped_in_the_html(facts, narrative, charts) -> None:
    lead = facts.summary["lead_quantity"]
    models = {**facts.summary["models"]}
    models[lead] = {**models[lead], "reliable": [HOSTILE, *models[lead]["reliable"]]}
    regions = tuple(
        {**r, "name": HOSTILE} if not r["is_total"] and i == 1 else r
        for i, r in enumerate(facts.regions)
    )
    hostile_region = regions[1]["id"]
    outlook = tuple(
        dataclasses.replace(o, region_name=HOSTILE) if o.region == hostile_region else o
        for o in facts.outlook
    )
    bad = dataclasses.replace(
        facts,
        summary={**facts.summary, "models": models},
        regions=regions,
        outlook=outlook,
        contact=HOSTILE,
    )
    bad_charts = [
        dataclasses.replace(c, alt=f'"><img src=x onerror=alert(1)>{HOSTILE}', caption=HOSTILE)
        for c in charts
    ]
    msg = _parse(_build(bad, build_narrative(bad), bad_charts))
    html = _html(msg)
    parsed = _tags(html)
    assert not any(t == "script" for t, _ in parsed.tags)
    assert [t for t, _ in parsed.tags].count("img") == 1  # the alt text opened no element
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in html
    text = " ".join(parsed.text)
    assert text.count(HOSTILE) >= 3  # shown as text: model, region, caption, contact
    img = next(a for t, a in parsed.tags if t == "img")
    assert img["alt"] == f'"><img src=x onerror=alert(1)>{HOSTILE}'


@pytest.mark.parametrize(
    ("field", "value"),
    [
        ("to", "lead@health.example\r\nBcc: spy@elsewhere.example"),
        ("to", "lead@health.example\nX-Injected: 1"),
        ("cc", "analysts@health.example\r"),
        ("from", "desk@health.example\nBcc: spy@elsewhere.example"),
        ("from", "Desk\u2028 <desk@health.example>"),
    ],
)
def test_line_breaks_in_addresses_are_refused(
    facts, narrative, charts, field: str, value: str
) -> None:
    changes = {"to": {"to": (value,)}, "cc": {"cc": (value,)}, "from": {"sender": value}}
    cfg = dataclasses.replace(EMAIL, **changes[field])
    with pytest.raises(DeliveryError, match=rf"email\.{field}") as info:
        _build(facts, narrative, charts, cfg=cfg)
    message = str(info.value)
    assert "line break" in message
    assert "fix:" in message
    assert repr(value) in message  # the value, its break escaped
    assert "\n" not in message
    assert "\r" not in message


@pytest.mark.parametrize("where", ["title", "template"])
def test_line_breaks_in_the_subject_are_refused(facts, narrative, charts, where: str) -> None:
    if where == "title":
        bad = dataclasses.replace(facts, title="Outlook\r\nBcc: spy@elsewhere.example")
        cfg = EMAIL
    else:
        bad = facts
        cfg = dataclasses.replace(EMAIL, subject="{title}\nBcc: spy@elsewhere.example")
    with pytest.raises(DeliveryError, match=r"email\.subject .*line break.*fix:"):
        _build(bad, narrative, charts, cfg=cfg)


@pytest.mark.parametrize(
    ("value", "reason"),
    [
        ("lead", "no @"),
        ("lead@", "mailbox name before the @ and a domain"),
        ("@health.example", "mailbox name before the @ and a domain"),
        ("lead@health..example", "not a valid host name"),
        ("lead@health_example", "not a valid host name"),
        ("lead@health.example, chief@health.example", "not one mail address"),
        ("lëad@health.example", "non-ASCII"),
        ("   ", "empty"),
    ],
)
def test_bad_addresses_are_refused_with_a_clear_message(
    facts, narrative, charts, value: str, reason: str
) -> None:
    cfg = dataclasses.replace(EMAIL, to=("lead@health.example", value))
    with pytest.raises(DeliveryError) as info:
        _build(facts, narrative, charts, cfg=cfg)
    message = str(info.value)
    assert "email.to[1]" in message  # the field, and which entry
    assert reason in message
    assert "fix:" in message
    assert "briefings@agency.example" in message
    assert isinstance(info.value, ForebriefError)


def test_missing_sender_or_recipients_are_refused(facts, narrative, charts) -> None:
    with pytest.raises(DeliveryError, match=r"email\.from: no sender .*fix: add from ="):
        _build(facts, narrative, charts, cfg=dataclasses.replace(EMAIL, sender=""))
    with pytest.raises(DeliveryError, match=r"email\.to: no recipient .*fix: add to ="):
        _build(facts, narrative, charts, cfg=dataclasses.replace(EMAIL, to=()))


def test_bad_subject_template_and_empty_pdf_are_refused(facts, narrative, charts) -> None:
    with pytest.raises(DeliveryError, match=r"email\.subject '\{date\}': cannot be filled in"):
        _build(facts, narrative, charts, cfg=dataclasses.replace(EMAIL, subject="{date}"))
    with pytest.raises(DeliveryError, match="PDF is empty"):
        _build(facts, narrative, charts, pdf=b"")


def test_a_template_override_with_a_data_uri_is_refused(
    facts, narrative, charts, tmp_path: Path
) -> None:
    # an agency's override that embeds a data: image would vanish in Gmail and Outlook
    (tmp_path / "email.html.j2").write_text(
        '{% extends "forebrief/email.html.j2" %}{% block footer %}<tr><td>'
        '<img src="data:image/png;base64,AAAA" alt="logo"></td></tr>{% endblock %}',
        encoding="utf-8",
    )
    with pytest.raises(DeliveryError, match="data: URI"):
        build_message(
            facts, narrative, charts, PDF, email=EMAIL, created=CREATED, templates_dir=tmp_path
        )


# --------------------------------------------------------------------------------------------
# through a real SMTP server


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return int(s.getsockname()[1])


@pytest.fixture
def smtp_server() -> Iterator[tuple[int, list[Any]]]:
    """An aiosmtpd server on 127.0.0.1 (a free port) that keeps each envelope; stops itself."""
    from aiosmtpd.controller import Controller

    received: list[Any] = []

    class Keep:
        async def handle_DATA(self, server: Any, session: Any, envelope: Any) -> str:
            received.append(envelope)
            return "250 2.0.0 kept"

    port = _free_port()
    controller = Controller(Keep(), hostname="127.0.0.1", port=port, ready_timeout=10)
    controller.start()
    try:
        yield port, received
    finally:
        controller.stop()


def test_the_built_message_arrives_whole_over_smtp(facts, narrative, charts, smtp_server) -> None:
    port, received = smtp_server
    raw = _build(facts, narrative, charts)
    rcpts = recipients_of(raw)
    receipt = send_message(
        raw,
        sender="desk@health.example",
        recipients=rcpts,
        host="127.0.0.1",
        port=port,
        security="none",
    )
    assert len(received) == 1
    env = received[0]
    assert env.mail_from == "desk@health.example"
    assert tuple(env.rcpt_tos) == rcpts == receipt.recipients
    assert env.original_content == raw  # byte for byte (our CRLF message needs no fixing)
    got = _parse(env.original_content)
    pdf = next(got.iter_attachments())
    assert pdf.get_content() == PDF
    assert _tree(got) == _tree(_parse(raw))
    assert receipt.server_reply.startswith("250")


def test_smtplib_send_message_of_the_object_is_the_same_message(
    facts, narrative, charts, smtp_server
) -> None:
    # the standard library's own sender, as a cross-check of our bytes
    port, received = smtp_server
    msg = build_message(facts, narrative, charts, PDF, email=EMAIL, created=CREATED)
    with smtplib.SMTP("127.0.0.1", port, timeout=10) as s:
        s.send_message(msg)
    got = _parse(received[0].original_content)
    assert next(got.iter_attachments()).get_content() == PDF
    assert _html(got).replace("\r\n", "\n") == _html(msg)  # RFC 2046 4.1.1 CRLF


# --------------------------------------------------------------------------------------------
# in a real browser


@pytest.mark.browser
def test_html_part_renders_at_600px_without_overflow(facts, narrative) -> None:
    playwright = pytest.importorskip("playwright.sync_api")
    chromium = Path("/usr/bin/chromium")
    if not chromium.exists():
        pytest.skip("Debian chromium is not installed (apt-get install chromium)")
    from forebrief.report.charts import briefing_figures

    charts = briefing_figures(facts)
    msg = _parse(_build(facts, narrative, charts))
    html = _html(msg)
    images = {
        str(p["Content-ID"]).strip("<>"): p.get_content() for p in msg.walk() if p["Content-ID"]
    }
    # data: URIs only for this screenshot: a browser does not resolve cid: URLs
    for cid, png in images.items():
        html = html.replace(
            f"cid:{cid}", "data:image/png;base64," + base64.b64encode(png).decode("ascii")
        )
    out = Path(__file__).resolve().parents[1] / "test-artifacts"
    out.mkdir(exist_ok=True)
    page_file = out / "email-600.html"
    page_file.write_text(html, encoding="utf-8")
    blocked: list[str] = []

    def only_local(route: Any) -> None:
        url = route.request.url
        if url.startswith(("file:", "data:")):
            route.continue_()
        else:
            blocked.append(url)
            route.abort()

    with playwright.sync_playwright() as p:
        browser = p.chromium.launch(executable_path=str(chromium))
        try:
            page = browser.new_page(viewport={"width": 600, "height": 900})
            page.route("**/*", only_local)
            page.goto(page_file.as_uri())
            page.wait_for_load_state("load")
            page.screenshot(path=str(out / "email-600.png"), full_page=True)
            scroll = page.evaluate("document.documentElement.scrollWidth")
            widths = page.evaluate(
                "Array.from(document.images).map(i => [i.complete, i.naturalWidth])"
            )
            container = page.evaluate(
                "document.querySelector('table.container').getBoundingClientRect().width"
            )
            page.set_viewport_size({"width": 375, "height": 900})  # a phone
            phone_scroll = page.evaluate("document.documentElement.scrollWidth")
        finally:
            browser.close()
    assert scroll <= 600 + 2
    assert container == pytest.approx(600, abs=1)
    assert widths
    assert all(done and w > 0 for done, w in widths)
    assert phone_scroll <= 375 + 2
    assert blocked == []  # nothing tried to leave the machine
