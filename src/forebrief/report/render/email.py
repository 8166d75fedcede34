"""The briefing as an e-mail (``briefing.eml``): a plain-text part, an HTML summary, the PDF.

Structure (built with the standard library's :class:`email.message.EmailMessage`)::

    multipart/mixed
     +-- multipart/alternative            RFC 2046 section 5.1.4: plainest first, richest last
     |    +-- text/plain                  the narrative, readable in any client
     |    +-- multipart/related           RFC 2387
     |         +-- text/html              the summary; images referenced as cid: (RFC 2392)
     |         +-- image/png              one chart, with a Content-ID
     +-- application/pdf                  the whole briefing

The HTML part is a summary (headline, next week's outlook table, one chart, the cautions)
that points to the attached PDF for the rest. It is rendered from ``email.html.j2`` with
Jinja2 (autoescaped) and its CSS (``email.css``) is inlined into ``style`` attributes by
css-inline, keeping ``@media`` rules; no remote stylesheet is fetched and no ``data:`` URI is
used, because Gmail (web) and desktop Outlook strip them (docs/conventions.md §1). The layout
is one 600 px column of ``role="presentation"`` tables.

Every number shown was formatted in :mod:`forebrief.report.facts`; this module only selects texts.
The bytes are deterministic for the same inputs: the Date header comes from ``created``, the
Message-ID, Content-IDs and MIME boundaries from hashes of the content. The message uses the
SMTP policy (CRLF line ends, RFC 5322 section 2.1), so ``message.as_bytes()`` is exactly what
goes over the wire, and both text parts are quoted-printable so the whole message is 7-bit.

Cost: one template render and one CSS inlining pass, O(size of the HTML); the PNG and the PDF
are base64-encoded once.
"""

from __future__ import annotations

import datetime as dt
import hashlib
import re
import struct
from collections.abc import Iterable, Sequence
from email import policy as email_policy
from email.headerregistry import Address
from email.message import EmailMessage
from email.utils import format_datetime, getaddresses
from pathlib import Path
from typing import Any

from forebrief.errors import DeliveryError
from forebrief.report.facts import BriefingFacts, OutlookRow
from forebrief.report.narrative import Narrative, narrative_text
from forebrief.report.render.html import template_environment
from forebrief.report.settings import EmailConfig

__all__ = [
    "CONTENT_WIDTH",
    "EMAIL_WIDTH",
    "build_message",
    "check_address",
    "check_header_text",
    "email_chart",
    "render_email_html",
]

#: Width of the e-mail's one column, in CSS pixels (docs/conventions.md §1).
EMAIL_WIDTH = 600
#: Width inside the column's 24 px side padding: the chart is shown at this width.
CONTENT_WIDTH = 552
#: Domain of generated identifiers when the sender's address gives none (RFC 2606 .invalid).
FALLBACK_DOMAIN = "forebrief.invalid"

_FIX_ADDRESS = (
    "write one address per entry, such as 'briefings@agency.example' or "
    "'Briefing desk <briefings@agency.example>'"
)
#: C0 controls, DEL, C1 controls and the Unicode line and paragraph separators: any of these
#: in a header value could end the header and start another (header injection).
_CONTROL = re.compile("[\x00-\x1f\x7f-\x9f\u2028\u2029]")
_DOMAIN = re.compile(
    r"^(?:[A-Za-z0-9](?:[A-Za-z0-9-]*[A-Za-z0-9])?\.)*"
    r"[A-Za-z0-9](?:[A-Za-z0-9-]*[A-Za-z0-9])?$|^\[[0-9A-Fa-f:.]+\]$"
)
_CID_SAFE = re.compile(r"[^A-Za-z0-9.-]+")
_DATA_URI = re.compile(r"""(?:src|href|background)\s*=\s*["']?\s*data:""", re.IGNORECASE)
_PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"


# --------------------------------------------------------------------------------------------
# header values


def check_header_text(value: str, *, field: str, fix: str) -> str:
    """``value`` unchanged, or :class:`DeliveryError` if it holds a line break or control.

    A line break in a header would end it and let the rest be read as new headers (header
    injection); the message names the field and shows the value with the break escaped.
    """
    if not isinstance(value, str):
        raise DeliveryError(
            f"e-mail {field}: expected text, got {type(value).__name__} {value!r}; fix: {fix}"
        )
    bad = _CONTROL.search(value)
    if bad is not None:
        raise DeliveryError(
            f"e-mail {field} {value!r}: contains a line break or another control character "
            f"({bad.group()!r} at position {bad.start()}), which could inject extra mail "
            f"headers; nothing was built or sent; fix: {fix}"
        )
    return value


def check_address(value: str, *, field: str) -> Address:
    """One mail address, checked: no control character, exactly one address, ASCII addr-spec.

    Parsing uses :func:`email.utils.getaddresses` and :class:`email.headerregistry.Address`
    (RFC 5322 section 3.4); the domain must be a host name or an address literal (RFC 5321
    section 4.1.2). Non-ASCII mailbox names would need SMTPUTF8 (RFC 6531) and are refused;
    a non-ASCII display name is fine (it is encoded, RFC 2047).
    """
    check_header_text(value, field=field, fix=_FIX_ADDRESS)
    text = value.strip()
    if not text:
        raise DeliveryError(f"e-mail {field}: the address is empty; fix: {_FIX_ADDRESS}")
    pairs = [p for p in getaddresses([text]) if p != ("", "")]
    if not pairs:
        inner = text[text.find("<") + 1 : text.rfind(">")] if "<" in text else text
        why = _addr_spec_problem(inner.strip()) or "it cannot be parsed"
        raise DeliveryError(
            f"e-mail {field} {value!r}: not a valid mail address ({why}); fix: {_FIX_ADDRESS}"
        )
    if len(pairs) != 1:
        raise DeliveryError(
            f"e-mail {field} {value!r}: not one mail address ({len(pairs)} "
            f"found); fix: {_FIX_ADDRESS}"
        )
    name, spec = pairs[0]
    problem = _addr_spec_problem(spec)
    if problem is None:
        try:
            address = Address(display_name=name, addr_spec=spec)
        except (ValueError, IndexError, TypeError) as exc:
            problem = str(exc) or "it cannot be parsed"
        else:
            if not address.username or not address.domain:
                problem = "it needs a mailbox name before the @ and a domain after it"
    if problem is not None:
        raise DeliveryError(
            f"e-mail {field} {value!r}: not a valid mail address ({problem}); fix: {_FIX_ADDRESS}"
        )
    return address


def _addr_spec_problem(spec: str) -> str | None:
    if "@" not in spec:
        return "it has no @"
    local, _, domain = spec.rpartition("@")
    if not local or not domain:
        return "it needs a mailbox name before the @ and a domain after it"
    if not spec.isascii():
        return "it has non-ASCII characters, which many mail servers refuse"
    if any(c.isspace() for c in spec):
        return "it contains a space"
    if not _DOMAIN.match(domain):
        return f"the domain {domain!r} is not a valid host name"
    return None


def _addresses(values: Iterable[str], *, field: str) -> tuple[Address, ...]:
    return tuple(
        check_address(v, field=f"{field}[{i}]" if i else field) for i, v in enumerate(values)
    )


def _subject(template: str, facts: BriefingFacts) -> str:
    fix = (
        "write [email] subject on one line, using only {title} and {issued}, such as "
        "'{title}: week of {issued}'"
    )
    try:
        text = template.format(title=facts.title, issued=facts.issued_text)
    except (KeyError, IndexError, ValueError, AttributeError) as exc:
        raise DeliveryError(
            f"e-mail email.subject {template!r}: cannot be filled in ({exc!s}); fix: {fix}"
        ) from None
    check_header_text(text, field="email.subject", fix=fix)
    if not text.strip():
        raise DeliveryError(f"e-mail email.subject {template!r}: the subject is empty; fix: {fix}")
    return text


# --------------------------------------------------------------------------------------------
# the HTML summary


def _png_size(png: bytes, key: str) -> tuple[int, int]:
    if not isinstance(png, bytes | bytearray) or png[:8] != _PNG_SIGNATURE or len(png) < 24:
        raise DeliveryError(
            f"chart {key!r}: its png field is not a PNG image, so it cannot be "
            "attached to the e-mail; fix: render the chart to PNG bytes"
        )
    w, h = struct.unpack(">II", png[16:24])
    return int(w), int(h)


def email_chart(facts: BriefingFacts, charts: Sequence[Any]) -> Any | None:
    """The one chart the e-mail shows: the jurisdiction-total fan chart, else an outlook chart.

    Keys start with the figure kind (``email_fan_<quantity>_<region>``, drawn for the e-mail
    column, comes first; then ``fan_<quantity>_<region>``, ``outlook_<quantity>``); the lead
    quantity of the headline is preferred. None when there is none of these.
    """
    lead = facts.summary.get("lead_quantity")
    total = facts.total_region if facts.total_available else None
    own = [c for c in charts if str(c.key).startswith("email_fan_")]
    fans = [c for c in charts if str(c.key).startswith("fan_")]
    outlooks = [c for c in charts if str(c.key).startswith("outlook_")]
    preferred = (
        [c for c in own if str(c.key).startswith(f"email_fan_{lead}_")]
        + own
        + [c for c in fans if total and c.key == f"fan_{lead}_{total}"]
        + [c for c in fans if total and str(c.key).endswith(f"_{total}")]
        + [c for c in outlooks if c.key == f"outlook_{lead}"]
        + outlooks
    )
    return preferred[0] if preferred else None


def _cid(chart: Any, domain: str) -> str:
    """A Content-ID (without brackets): the chart kind and a hash of its PNG (RFC 2392).

    Kept short so that the header is not folded (RFC 5322 section 2.1.1: 78 characters).
    """
    kind = _CID_SAFE.sub("-", str(chart.key).split("_")[0]).strip("-.") or "chart"
    return f"{kind}.{hashlib.sha256(chart.png).hexdigest()[:12]}@{domain}"


def _outlook_tables(facts: BriefingFacts) -> list[dict[str, Any]]:
    """Next week's outlook per quantity, one row per region (total first), texts only."""
    first = facts.summary.get("horizon") or (min(facts.horizons) if facts.horizons else 1)
    tables = []
    for q in facts.quantities:
        rows: list[OutlookRow] = []
        for r in facts.regions:
            row = next(
                (
                    o
                    for o in facts.outlook
                    if o.quantity == q["id"] and o.region == r["id"] and o.horizon == first
                ),
                None,
            )
            if row is not None:
                rows.append(row)
        if not rows:
            continue
        tables.append(
            {
                "caption": f"{q['name']} ({q['unit']})",
                "week_ending_text": rows[0].week_ending_text,
                "last_week_text": rows[0].last_week_text,
                "rows": [
                    {
                        "region_name": o.region_name,
                        "is_total": o.is_total,
                        "last_value_text": o.last_value_text,
                        "last_provisional": o.last_provisional,
                        "last_nowcast_text": o.last_value_nowcast_text,
                        "median_text": o.median_text,
                        "range90_text": o.range90_text,
                        "chance_text": o.p_above_threshold_text or "no alert line set",
                        "threshold_text": (
                            f"line: {o.threshold_text}"
                            if o.p_above_threshold_text and o.threshold_text
                            else ""
                        ),
                    }
                    for o in rows
                ],
                "any_provisional": any(o.last_provisional for o in rows),
            }
        )
    return tables


def _models(facts: BriefingFacts) -> list[dict[str, Any]]:
    names = {q["id"]: q["name"] for q in facts.quantities}
    out = []
    for qid, m in (facts.summary.get("models") or {}).items():
        if not m:
            continue
        verb = "is" if m["n_reliable"] == 1 else "are"
        out.append(
            {
                "text": f"{names.get(qid, qid)}: {m['n_reliable']} of {m['n_models']} models {verb} "
                "rated reliable on their recent record",
                "reliable": list(m.get("reliable") or []),
            }
        )
    return out


def render_email_html(
    facts: BriefingFacts,
    narrative: Narrative,
    chart: Any | None,
    *,
    cid: str | None,
    subject: str,
    attachment_name: str,
    templates_dir: Path | None = None,
) -> str:
    """The HTML summary with its CSS inlined (css-inline, ``@media`` kept, nothing fetched)."""
    try:
        import css_inline
    except ImportError as exc:  # pragma: no cover - a declared dependency
        raise DeliveryError(
            "the e-mail needs the css-inline package; fix: pip install 'css-inline>=0.14'"
        ) from exc
    env = template_environment(templates_dir)
    sections = {s.key: s for s in narrative.sections}
    cautions = sections["cautions"].bullets if "cautions" in sections else facts.cautions
    figure = None
    if chart is not None and cid is not None:
        w, h = _png_size(chart.png, chart.key)
        figure = {
            "src": f"cid:{cid}",
            "alt": chart.alt,
            "title": chart.title,
            "caption": chart.caption,
            "width": CONTENT_WIDTH,
            "height": round(CONTENT_WIDTH * h / w),
        }
    rest = [s.title for s in narrative.sections if s.key not in ("outlook", "cautions")]
    html = env.get_template("email.html.j2").render(
        facts=facts,
        narrative=narrative,
        subject=subject,
        preheader=narrative.headline[0] if narrative.headline else facts.title,
        outlook_tables=_outlook_tables(facts),
        models=_models(facts),
        figure=figure,
        cautions=cautions,
        rest=rest,
        attachment_name=attachment_name,
        width=EMAIL_WIDTH,
        content_width=CONTENT_WIDTH,
    )
    inliner = css_inline.CSSInliner(
        keep_at_rules=True,
        load_remote_stylesheets=False,
        keep_link_tags=False,
        keep_style_tags=False,
    )
    inlined = str(inliner.inline(html))
    if _DATA_URI.search(inlined):
        raise DeliveryError(
            "e-mail template email.html.j2: uses a data: URI, which Gmail and "
            "Outlook strip; fix: attach the image as a cid: part instead"
        )
    return inlined


# --------------------------------------------------------------------------------------------
# the message


def _sender_domain(sender: Address) -> str:
    """The sender's domain for generated identifiers, or ``forebrief.invalid`` (RFC 2606)."""
    domain = sender.domain
    return (
        domain
        if domain and not domain.startswith("[") and _DOMAIN.match(domain)
        else FALLBACK_DOMAIN
    )


def _set_boundaries(message: EmailMessage, digest: str) -> None:
    """Fixed MIME boundaries (deterministic bytes). '=_' cannot occur in quoted-printable or
    base64 bodies, and no boundary is a prefix of another (RFC 2046 section 5.1.1)."""
    for part in message.walk():
        if part.is_multipart():
            sub = part.get_content_subtype()
            part.set_boundary(f"=_forebrief.{sub}.{digest[:24]}")


def build_message(
    facts: BriefingFacts,
    narrative: Narrative,
    charts: Sequence[Any],
    pdf: bytes,
    *,
    email: EmailConfig,
    created: dt.datetime,
    templates_dir: Path | None = None,
) -> EmailMessage:
    """The briefing e-mail: text and HTML alternatives, one inline chart, the PDF attached.

    ``charts`` are chart specs (``key, title, caption, alt, svg, png``); the e-mail shows one
    (:func:`email_chart`). ``created`` gives the Date header (a naive time is taken as UTC).
    Raises :class:`DeliveryError` naming the field, value and fix for a missing sender or
    recipient, a line break or control character in an address or the subject, or an address
    that does not parse. Deterministic: the same inputs give the same bytes.
    """
    if not email.sender:
        raise DeliveryError(
            "e-mail email.from: no sender is set; fix: add from = "
            '"briefings@agency.example" to the [email] table of '
            "forebrief.toml"
        )
    sender = check_address(email.sender, field="email.from")
    if not email.to:
        raise DeliveryError(
            "e-mail email.to: no recipient is set; fix: add to = "
            '["leadership@agency.example"] to the [email] table of '
            "forebrief.toml"
        )
    to = _addresses(email.to, field="email.to")
    cc = _addresses(email.cc, field="email.cc")
    subject = _subject(email.subject, facts)
    if not isinstance(pdf, bytes | bytearray) or not pdf:
        raise DeliveryError(
            "e-mail attachment: the PDF is empty, so there is nothing to "
            "attach; fix: render the briefing PDF first"
        )
    when = created if created.tzinfo is not None else created.replace(tzinfo=dt.UTC)

    domain = _sender_domain(sender)
    chart = email_chart(facts, charts)
    cid = _cid(chart, domain) if chart is not None else None
    attachment_name = f"briefing-{facts.issued}.pdf" if facts.issued else "briefing.pdf"
    text = narrative_text(facts, narrative)
    html = render_email_html(
        facts,
        narrative,
        chart,
        cid=cid,
        subject=subject,
        attachment_name=attachment_name,
        templates_dir=templates_dir,
    )

    h = hashlib.sha256()
    for piece in (
        subject,
        str(sender),
        *map(str, to),
        "|",
        *map(str, cc),
        when.isoformat(),
        text,
        html,
    ):
        h.update(piece.encode("utf-8"))
        h.update(b"\x00")
    if chart is not None:
        h.update(chart.png)
    h.update(bytes(pdf))
    digest = h.hexdigest()

    msg = EmailMessage(policy=email_policy.SMTP)
    msg["Subject"] = subject
    msg["From"] = sender
    msg["To"] = to
    if cc:
        msg["Cc"] = cc
    msg["Date"] = format_datetime(when)
    # issue date, creation time (UTC) and content hash; short enough not to be folded
    stamp = when.astimezone(dt.UTC).strftime("%Y%m%d%H%M%S")
    msg["Message-ID"] = f"<{facts.issued or 'briefing'}.{stamp}.{digest[:8]}@{domain}>"
    # plain ASCII text within 78 columns travels as is (7bit); anything else quoted-printable
    plain_cte = (
        "7bit"
        if text.isascii() and max(map(len, text.splitlines()), default=0) <= 78
        else "quoted-printable"
    )
    msg.set_content(text, subtype="plain", charset="utf-8", cte=plain_cte)
    msg.add_alternative(html, subtype="html", charset="utf-8", cte="quoted-printable")
    if chart is not None and cid is not None:
        html_part = msg.get_payload()[1]  # type: ignore[index]
        assert isinstance(html_part, EmailMessage)
        html_part.add_related(
            bytes(chart.png),
            maintype="image",
            subtype="png",
            cid=f"<{cid}>",
            filename=f"{_CID_SAFE.sub('-', chart.key)}.png",
            disposition="inline",
        )
        # RFC 2387 section 3.1: the type parameter (the root part's type) is required
        html_part.set_param("type", "text/html")
    msg.add_attachment(bytes(pdf), maintype="application", subtype="pdf", filename=attachment_name)
    _set_boundaries(msg, digest)
    return msg
