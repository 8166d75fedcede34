"""The briefing on paper and on screen: the demo's briefing.pdf and briefing.html.

One shared run of the invented demo (module fixture) feeds every test. The PDF is checked with
pypdf (text, page size, page count, fonts), pdftoppm + Pillow (no blank page) and WeasyPrint's
own layout (no chart parted from its caption, no table header without rows). The HTML is
checked as markup (self-contained, headings, captions, escaping) and, in the ``browser``
tests, in headless Debian Chromium through Playwright with every non-local request blocked.
Screenshots and page images are kept under ``test-artifacts/render/`` (git-ignored).
"""

from __future__ import annotations

import dataclasses
import datetime as dt
import io
import itertools
import re
import shutil
import socket
import subprocess
from collections.abc import Iterator
from html.parser import HTMLParser
from pathlib import Path
from typing import Any

import pytest

from forebrief.app.config import load_config
from forebrief.app.pipeline import record_briefing, render_briefing
from forebrief.demo import generate_scenario, write_scenario
from forebrief.errors import ForebriefError
from forebrief.report.narrative import build_narrative
from forebrief.report.render import render_html, render_pdf, template_environment
from forebrief.report.render.pdf import OfflineFetcher
from forebrief.report.resources import template_root

pypdf = pytest.importorskip("pypdf")
from PIL import Image  # noqa: E402  (Pillow comes with matplotlib)

ARTIFACTS = Path(__file__).resolve().parents[1] / "test-artifacts" / "render"
HOSTILE = "<script>alert(1)</script>"
CHROMIUM = Path("/usr/bin/chromium")
# PostScript points per inch (PDF 1.7, ISO 32000-1 §8.3.2.3: default user space unit 1/72 in);
# A4 is 210 x 297 mm (ISO 216), US Letter 8.5 x 11 in (ANSI/ASME Y14.1).
A4_PT = (round(210 / 25.4 * 72), round(297 / 25.4 * 72))  # (595, 842)
LETTER_PT = (round(8.5 * 72), 11 * 72)  # (612, 792)


# --------------------------------------------------------------------------------------------
# fixtures


@pytest.fixture(scope="module")
def drawn() -> Iterator[dict[int, tuple[Any, list[Any]]]]:
    """Charts depend on the facts alone, so within this module each facts object is drawn
    once: the letter rendering below reuses the demo's figures (drawing takes most of the
    rendering time)."""
    import forebrief.report.charts as charts_module

    cache: dict[int, tuple[Any, list[Any]]] = {}
    real = charts_module.briefing_figures

    def once(facts: Any, **kwargs: Any) -> list[Any]:
        if id(facts) not in cache:
            cache[id(facts)] = (facts, real(facts, **kwargs))
        return cache[id(facts)][1]

    with pytest.MonkeyPatch.context() as mp:
        mp.setattr(charts_module, "briefing_figures", once)
        yield cache


@pytest.fixture(scope="module")
def demo(tmp_path_factory: pytest.TempPathFactory, drawn: Any) -> Any:
    """The invented demo's weekly record, written once for the whole module."""
    folder = tmp_path_factory.mktemp("render-demo")
    write_scenario(generate_scenario(), folder)
    cfg = load_config(folder / "forebrief.toml")
    return record_briefing(cfg, created=dt.datetime(2026, 11, 30, tzinfo=dt.UTC))


@pytest.fixture(scope="module")
def charts(demo: Any, drawn: dict[int, tuple[Any, list[Any]]]) -> list[Any]:
    return drawn[id(demo.run.facts)][1]


@pytest.fixture(scope="module")
def record(demo: Any) -> Path:
    return Path(demo.record.path)


@pytest.fixture(scope="module")
def facts(demo: Any) -> Any:
    return demo.run.facts


@pytest.fixture(scope="module")
def pdf_bytes(record: Path) -> bytes:
    return (record / "briefing.pdf").read_bytes()


@pytest.fixture(scope="module")
def reader(pdf_bytes: bytes) -> Any:
    return pypdf.PdfReader(io.BytesIO(pdf_bytes))


@pytest.fixture(scope="module")
def page_texts(reader: Any) -> list[str]:
    return [" ".join((p.extract_text() or "").split()) for p in reader.pages]


@pytest.fixture(scope="module")
def html(record: Path) -> str:
    return (record / "briefing.html").read_text(encoding="utf-8")


@pytest.fixture(scope="module")
def letter(demo: Any, tmp_path_factory: pytest.TempPathFactory) -> tuple[Any, bytes]:
    """The same week rendered with ``[briefing] paper = "letter"`` in the configuration."""
    src = demo.run.config.source
    text = src.read_text(encoding="utf-8")
    assert 'paper = "A4"' in text
    folder = tmp_path_factory.mktemp("letter")
    for item in src.parent.iterdir():
        if item.name != "archive":
            target = folder / item.name
            if item.is_dir():
                shutil.copytree(item, target)
            else:
                shutil.copy(item, target)
    (folder / "forebrief.toml").write_text(
        text.replace('paper = "A4"', 'paper = "letter"'), encoding="utf-8"
    )
    cfg = load_config(folder / "forebrief.toml")
    assert cfg.paper == "letter"
    rendered = render_briefing(dataclasses.replace(demo.run, config=cfg))
    return rendered, render_pdf(rendered.print_html)


def _squeeze(text: str) -> str:
    return re.sub(r"\s+", " ", text)


def _lead_row(facts: Any) -> Any:
    focus = facts.summary["focus"]
    return next(
        o
        for o in facts.outlook
        if o.region == focus["region"]
        and o.quantity == focus["quantity"]
        and o.horizon == focus["horizon"]
    )


# --------------------------------------------------------------------------------------------
# the PDF


def test_pdf_page_count_within_two_to_six(reader: Any) -> None:
    assert 2 <= len(reader.pages) <= 6, f"{len(reader.pages)} pages"


def _size_pt(page: Any) -> tuple[int, int]:
    box = page.mediabox
    return round(float(box.width)), round(float(box.height))


def test_pdf_is_a4_by_default(reader: Any) -> None:
    assert {_size_pt(p) for p in reader.pages} == {A4_PT}


def test_pdf_is_letter_when_configured(letter: tuple[Any, bytes]) -> None:
    r = pypdf.PdfReader(io.BytesIO(letter[1]))
    assert {_size_pt(p) for p in r.pages} == {LETTER_PT}
    assert 2 <= len(r.pages) <= 6
    text = " ".join((r.pages[0].extract_text() or "").split())
    assert f"Page 1 of {len(r.pages)}" in text


def test_pdf_footer_counts_pages_and_header_repeats(
    reader: Any, page_texts: list[str], facts: Any
) -> None:
    n = len(reader.pages)
    for i, text in enumerate(page_texts, start=1):
        assert f"Page {i} of {n}" in text, f"page {i}"
        assert facts.title in text, f"page {i}: running header"
        assert facts.issued_text in text, f"page {i}: running header"


def test_pdf_text_carries_the_headline_numbers(page_texts: list[str], facts: Any) -> None:
    """The PDF's text is real text: page 1 names the lead row's median and 90% range."""
    row = _lead_row(facts)
    first = page_texts[0]
    assert row.median_text in first
    assert row.range90_text in first
    assert "In brief" in first
    # the lead quantity's outlook table is on page 1, the total's fan chart by page 2
    assert f"{row.quantity_name} ({row.unit}): {row.method_label} by region" in first
    assert f"{row.quantity_name}: outlook for {row.region_name}." in " ".join(page_texts[:2])


def test_pdf_shows_every_caution(page_texts: list[str], facts: Any) -> None:
    text = " ".join(page_texts)
    for caution in facts.cautions:
        assert " ".join(caution.split()) in text


def test_pdf_pages_are_not_blank(pdf_bytes: bytes, reader: Any, tmp_path: Path) -> None:
    if shutil.which("pdftoppm") is None:
        pytest.skip("pdftoppm (poppler-utils) is not installed")
    src = tmp_path / "briefing.pdf"
    src.write_bytes(pdf_bytes)
    subprocess.run(
        ["pdftoppm", "-png", "-r", "30", str(src), str(tmp_path / "page")],
        check=True,
        capture_output=True,
        timeout=60,
    )
    pngs = sorted(tmp_path.glob("page-*.png"))
    assert len(pngs) == len(reader.pages)
    ARTIFACTS.mkdir(parents=True, exist_ok=True)
    for i, png in enumerate(pngs):
        with Image.open(png) as im:
            grey = im.convert("L")
            dark = sum(grey.histogram()[:200])  # pixels clearly darker than paper
            share = dark / (grey.width * grey.height)
        # a short last page (the end of the methods note) is about 1% ink; a page with only
        # its running header and footer has no body text
        assert share > 0.005, f"{png.name}: only {share:.2%} non-white pixels"
        body = [
            ln
            for ln in (reader.pages[i].extract_text() or "").splitlines()
            if ln.strip()
            and "Page " not in ln
            and "issued" not in ln
            and "does not make them" not in ln
        ]
        assert sum(len(ln) for ln in body) > 100, f"{png.name}: no body text"
        shutil.copy(png, ARTIFACTS / f"briefing-{png.name}")


def test_pdf_fonts_are_embedded(reader: Any) -> None:
    """Fonts come from local files (fontconfig), subset and embedded: nothing fetched."""
    names = set()
    for page in reader.pages:
        fonts = page["/Resources"].get("/Font", {})
        for ref in fonts.values():
            font = ref.get_object()
            desc = font.get("/FontDescriptor")
            if desc is None and "/DescendantFonts" in font:
                desc = font["/DescendantFonts"][0].get_object().get("/FontDescriptor")
            assert desc is not None, font
            desc = desc.get_object()
            assert any(k in desc for k in ("/FontFile", "/FontFile2", "/FontFile3")), desc
            names.add(str(font["/BaseFont"]))
    assert any("DejaVu" in n for n in names), names


def _walk(box: Any, ancestors: tuple[Any, ...] = ()) -> Iterator[tuple[Any, tuple[Any, ...]]]:
    yield box, ancestors
    for child in getattr(box, "children", ()) or ():
        yield from _walk(child, (*ancestors, box))


def test_pdf_keeps_charts_with_captions_and_table_heads_with_rows(
    demo: Any, letter: Any, charts: list[Any]
) -> None:
    """WeasyPrint's own page boxes: each figure on one page, image and caption together; a
    page that shows a table's caption or header also shows some of its body rows."""
    weasyprint = pytest.importorskip("weasyprint")
    a4_html = render_html(
        demo.run.facts, demo.run.narrative, charts, for_print=True, paper="A4", images="svg"
    )
    for print_html in (a4_html, letter[0].print_html):
        doc = weasyprint.HTML(string=print_html, url_fetcher=OfflineFetcher()).render()
        figure_pages: dict[int, set[int]] = {}
        for number, page in enumerate(doc.pages, start=1):
            parts: dict[int, set[str]] = {}
            heads: set[int] = set()
            rows: set[int] = set()
            for box, anc in _walk(page._page_box):
                tag = box.element_tag
                fig = next((a for a in anc if a.element_tag == "figure"), None)
                if fig is not None and tag in ("img", "figcaption"):
                    parts.setdefault(id(fig.element), set()).add(tag)
                    figure_pages.setdefault(id(fig.element), set()).add(number)
                # the caption hangs from the table's wrapper box, the header from the table
                # box; both boxes carry the same element
                table = next((a for a in reversed(anc) if a.element_tag == "table"), None)
                if table is not None and tag in ("caption", "thead"):
                    heads.add(id(table.element))
                if tag == "tr" and any(a.element_tag == "tbody" for a in anc):
                    owner = next(a for a in reversed(anc) if a.element_tag == "table")
                    rows.add(id(owner.element))
            for seen in parts.values():
                assert seen == {"img", "figcaption"}, f"page {number}: figure split ({seen})"
            assert heads <= rows, f"page {number}: a table's header without any of its rows"
        assert figure_pages, "no figure in the print HTML"
        assert all(len(p) == 1 for p in figure_pages.values()), figure_pages


# --------------------------------------------------------------------------------------------
# offline rendering


@pytest.fixture
def no_network(monkeypatch: pytest.MonkeyPatch) -> list[tuple[str, Any]]:
    """Record (and refuse) every socket connection and name lookup during the test."""
    attempts: list[tuple[str, Any]] = []

    def connect(self: Any, address: Any) -> None:
        attempts.append(("connect", address))
        raise OSError("network refused by the test")

    def getaddrinfo(host: Any, *args: Any, **kwargs: Any) -> Any:
        attempts.append(("getaddrinfo", host))
        raise OSError("name lookup refused by the test")

    monkeypatch.setattr(socket.socket, "connect", connect)
    monkeypatch.setattr(socket.socket, "connect_ex", connect)
    monkeypatch.setattr(socket, "getaddrinfo", getaddrinfo)
    monkeypatch.setattr(
        socket, "create_connection", lambda address, *a, **k: connect(None, address)
    )
    return attempts


REMOTE_OVERRIDE = (
    '{% extends "forebrief/briefing.html.j2" %}\n'
    '{% block letterhead %}<p class="org">Agency letterhead</p>'
    '<img src="https://logo.example.invalid/mark.png" alt="Agency mark">{% endblock %}\n'
    "{% block extra_css %}.masthead { background-image: url(http://css.example.invalid/bg.png); }"
    "{% endblock %}\n"
)


def _render_remote(tmp_path: Path, demo: Any) -> tuple[str, bytes | None, BaseException | None]:
    (tmp_path / "briefing.html.j2").write_text(REMOTE_OVERRIDE, encoding="utf-8")
    print_html = render_html(
        demo.run.facts, demo.run.narrative, (), for_print=True, images="svg", templates_dir=tmp_path
    )
    assert "https://logo.example.invalid/mark.png" in print_html
    try:
        return print_html, render_pdf(print_html), None
    except BaseException as exc:  # WeasyPrint's FatalURLFetchingError is a BaseException
        return print_html, None, exc


def test_pdf_with_remote_urls_makes_no_network_attempt(
    tmp_path: Path, demo: Any, no_network: list[Any]
) -> None:
    """An override with an https image and a CSS url(http://...) either renders without
    them or stops with an error naming the refused address; no connection is ever tried."""
    _, pdf, exc = _render_remote(tmp_path, demo)
    assert no_network == []
    if exc is not None:
        # what render_pdf does today: the offline fetcher refuses the first remote address
        assert "https://logo.example.invalid/mark.png" in str(exc)
        assert "offline" in str(exc)
    else:
        assert pdf is not None
        assert pdf.startswith(b"%PDF-")


def test_pdf_remote_url_error_is_a_forebrief_error(
    tmp_path: Path, demo: Any, no_network: list[Any]
) -> None:
    _, pdf, exc = _render_remote(tmp_path, demo)
    assert pdf is not None or isinstance(exc, ForebriefError)


# --------------------------------------------------------------------------------------------
# custom templates


def test_template_override_replaces_one_block_only(tmp_path: Path, demo: Any) -> None:
    (tmp_path / "briefing.html.j2").write_text(
        '{% extends "forebrief/briefing.html.j2" %}'
        '{% block letterhead %}<p class="org">Agency letterhead</p>{% endblock %}',
        encoding="utf-8",
    )
    run = demo.run
    for for_print in (False, True):
        shipped = render_html(run.facts, run.narrative, (), for_print=for_print)
        custom = render_html(
            run.facts, run.narrative, (), for_print=for_print, templates_dir=tmp_path
        )
        assert '<p class="org">Agency letterhead</p>' in custom
        original = f'<p class="org">{run.facts.jurisdiction}</p>'
        assert original in shipped
        assert original not in custom
        # everything else is unchanged (the block's surrounding whitespace aside)
        restored = custom.replace('<p class="org">Agency letterhead</p>', original)
        assert _squeeze(restored) == _squeeze(shipped)


def test_template_override_of_the_css_falls_back_for_the_rest(tmp_path: Path, demo: Any) -> None:
    shipped_css = (template_root() / "print.css").read_text(encoding="utf-8")
    (tmp_path / "print.css").write_text(
        shipped_css + "\n.org { letter-spacing: 0; }\n", encoding="utf-8"
    )
    out = render_html(
        demo.run.facts, demo.run.narrative, (), for_print=True, templates_dir=tmp_path
    )
    assert ".org { letter-spacing: 0; }" in out
    assert 'class="headline"' in out  # the shipped briefing.html.j2 still renders
    assert "size: A4;" in out


def test_template_environment_autoescapes() -> None:
    env = template_environment()
    out = env.from_string("<p>{{ name }}</p>").render(name=HOSTILE)
    assert out == "<p>&lt;script&gt;alert(1)&lt;/script&gt;</p>"


# --------------------------------------------------------------------------------------------
# the HTML as markup


class _Outline(HTMLParser):
    """Collects headings, images, tables and external references of a document."""

    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.headings: list[tuple[int, str | None]] = []
        self.images: list[dict[str, str | None]] = []
        self.refs: list[str] = []
        self.tables = 0
        self.captions = 0
        self.header_cells: list[dict[str, str | None]] = []
        self.scripts = 0
        self.text: list[str] = []

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        a = dict(attrs)
        if re.fullmatch(r"h[1-6]", tag):
            self.headings.append((int(tag[1]), a.get("id")))
        elif tag == "img":
            self.images.append(a)
        elif tag == "table":
            self.tables += 1
        elif tag == "caption":
            self.captions += 1
        elif tag == "th":
            self.header_cells.append(a)
        elif tag == "script":
            self.scripts += 1
        for key in ("src", "href"):
            if a.get(key):
                self.refs.append(str(a[key]))

    def handle_data(self, data: str) -> None:
        self.text.append(data)


def _outline(html: str) -> _Outline:
    p = _Outline()
    p.feed(html)
    return p


def test_html_is_self_contained(html: str) -> None:
    o = _outline(html)
    assert o.images, "no charts in the HTML"
    assert all(r.startswith(("data:", "#")) for r in o.refs), [
        r[:60] for r in o.refs if not r.startswith(("data:", "#"))
    ]
    assert not re.search(r"url\(\s*['\"]?(?!data:)", html), "a CSS url() that is not data:"
    assert all((img.get("alt") or "").strip() for img in o.images)


def test_html_headings_in_order_and_sections_follow_the_narrative(html: str) -> None:
    o = _outline(html)
    levels = [lvl for lvl, _ in o.headings]
    assert levels[0] == 1
    assert levels.count(1) == 1
    for prev, cur in itertools.pairwise(levels):
        assert cur <= prev + 1, f"heading jumps from h{prev} to h{cur}"
    ids = [i for lvl, i in o.headings if lvl == 2]
    assert ids == [
        "h-headline",
        "h-outlook",
        "h-certainty",
        "h-trust",
        "h-track",
        "h-changes",
        "h-data",
        "h-cautions",
        "h-methods",
    ]


def test_html_tables_have_captions_and_header_cells(html: str) -> None:
    o = _outline(html)
    assert o.tables >= 3
    assert o.captions == o.tables
    assert o.header_cells
    assert all(c.get("scope") in ("col", "row", "colgroup") for c in o.header_cells)


def _hostile_facts(facts: Any) -> Any:
    """The facts with the first model renamed to a script element (verdicts and the
    dominant-model notes alike), as a hostile submission would name itself."""
    victim = facts.verdicts[0].model
    verdicts = tuple(
        dataclasses.replace(v, model=HOSTILE) if v.model == victim else v for v in facts.verdicts
    )
    outlook = tuple(
        dataclasses.replace(o, dominant_model=HOSTILE) if o.dominant_model == victim else o
        for o in facts.outlook
    )
    return dataclasses.replace(facts, verdicts=verdicts, outlook=outlook)


def test_hostile_model_name_is_escaped_text(facts: Any) -> None:
    hostile = _hostile_facts(facts)
    for for_print in (False, True):
        out = render_html(hostile, build_narrative(hostile), (), for_print=for_print)
        o = _outline(out)
        assert o.scripts == 0
        assert "<script" not in out.lower()
        assert "&lt;script&gt;alert(1)&lt;/script&gt;" in out
        assert HOSTILE in "".join(o.text)  # shown to the reader as the literal name


def test_hostile_model_name_prints_as_text(facts: Any, no_network: list[Any]) -> None:
    hostile = _hostile_facts(facts)
    pdf = render_pdf(render_html(hostile, build_narrative(hostile), (), for_print=True))
    text = " ".join(
        " ".join((p.extract_text() or "").split()) for p in pypdf.PdfReader(io.BytesIO(pdf)).pages
    )
    assert HOSTILE in text
    assert no_network == []


# --------------------------------------------------------------------------------------------
# contrast (WCAG 2.x)


def _relative_luminance(hex_colour: str) -> float:
    """WCAG 2.2, definition "relative luminance" (W3C 2023): sRGB channels linearised with
    c/12.92 below 0.04045, else ((c + 0.055)/1.055)^2.4; L = 0.2126 R + 0.7152 G + 0.0722 B."""
    h = hex_colour.lstrip("#")
    if len(h) == 3:
        h = "".join(c * 2 for c in h)
    rgb = [int(h[i : i + 2], 16) / 255 for i in (0, 2, 4)]
    lin = [c / 12.92 if c <= 0.04045 else ((c + 0.055) / 1.055) ** 2.4 for c in rgb]
    return 0.2126 * lin[0] + 0.7152 * lin[1] + 0.0722 * lin[2]


def contrast_ratio(a: str, b: str) -> float:
    """WCAG 2.2, definition "contrast ratio": (L1 + 0.05) / (L2 + 0.05), L1 the lighter."""
    la, lb = sorted((_relative_luminance(a), _relative_luminance(b)), reverse=True)
    return (la + 0.05) / (lb + 0.05)


@pytest.mark.parametrize(
    ("fg", "bg", "expected"),
    [
        ("#000000", "#ffffff", 21.0),  # WCAG 2.2 definition: ratios range from 1:1 to 21:1
        ("#ffffff", "#ffffff", 1.0),
        ("#767676", "#ffffff", 4.54),  # from memory: the lightest grey that passes AA on white
    ],
)
def test_contrast_formula_reference_values(fg: str, bg: str, expected: float) -> None:
    assert contrast_ratio(fg, bg) == pytest.approx(expected, abs=0.01)


def test_css_palette_contrast_meets_aa() -> None:
    """Text colours of briefing.css on the backgrounds they are used on: at least 4.5:1
    (WCAG 2.2 success criterion 1.4.3, level AA, body text)."""
    css = (template_root() / "briefing.css").read_text(encoding="utf-8")
    root = re.search(r":root\s*\{([^}]*)\}", css)
    assert root is not None
    var = dict(re.findall(r"--([\w-]+)\s*:\s*(#[0-9a-fA-F]{3,6})", root.group(1)))
    pairs = [
        ("ink", "paper"),
        ("slate", "paper"),
        ("accent", "paper"),
        ("amber", "paper"),
        ("ink", "accent-bg"),
        ("slate", "accent-bg"),
        ("accent", "accent-bg"),
        ("ink", "amber-bg"),
        ("amber", "amber-bg"),
        ("slate", "amber-bg"),
    ]
    for fg, bg in pairs:
        ratio = contrast_ratio(var[fg], var[bg])
        assert ratio >= 4.5, f"--{fg} on --{bg}: {ratio:.2f}:1"
    # the fixed colours of the verdict labels, masthead and table heads
    for fg, bg in [
        ("#005a46", "#e6f4ef"),
        ("#7a3e00", "#fbefe2"),
        (var["slate"], "#f0efec"),
        (var["slate"], "#eeebe4"),
        (var["slate"], "#f3f7f7"),
        ("#d3dbe3", var["ink"]),
        ("#e4e9ee", var["ink"]),
        ("#fff", var["ink"]),
    ]:
        assert fg in css  # the pair list follows the stylesheet
        ratio = contrast_ratio(fg, bg)
        assert ratio >= 4.5, f"{fg} on {bg}: {ratio:.2f}:1"


# --------------------------------------------------------------------------------------------
# in a real browser


@pytest.fixture(scope="module")
def browser() -> Iterator[Any]:
    sync_api = pytest.importorskip("playwright.sync_api")
    if not CHROMIUM.exists():
        pytest.skip("Debian chromium is not installed at /usr/bin/chromium")
    with sync_api.sync_playwright() as p:
        b = p.chromium.launch(executable_path=str(CHROMIUM))
        yield b
        b.close()


def _open(browser: Any, path: Path, width: int) -> tuple[Any, dict[str, list[str]]]:
    page = browser.new_page(viewport={"width": width, "height": 900})
    seen: dict[str, list[str]] = {"errors": [], "dialogs": [], "blocked": []}
    page.on("console", lambda m: seen["errors"].append(m.text) if m.type == "error" else None)
    page.on("pageerror", lambda e: seen["errors"].append(str(e)))

    def dialog(d: Any) -> None:
        seen["dialogs"].append(d.message)
        d.dismiss()

    page.on("dialog", dialog)

    def route(r: Any) -> None:
        if r.request.url.startswith(("file:", "data:")):
            r.continue_()
        else:
            seen["blocked"].append(r.request.url)
            r.abort()

    page.route("**/*", route)
    page.goto(path.resolve().as_uri(), wait_until="load")
    return page, seen


# Colour and background of every element with its own text, against the first opaque
# background among its ancestors (the page has no transparency and no background images).
_CONTRASTS_JS = """() => {
  const rgb = s => (s.match(/[\\d.]+/g) || []).map(Number);
  const out = [];
  for (const el of document.querySelectorAll('body *')) {
    const own = [...el.childNodes].some(n => n.nodeType === 3 && n.textContent.trim());
    if (!own || el.getClientRects().length === 0) continue;
    const st = getComputedStyle(el);
    if (st.visibility === 'hidden') continue;
    let bg = null;
    for (let a = el; a; a = a.parentElement) {
      const c = rgb(getComputedStyle(a).backgroundColor);
      if (c.length === 3 || (c.length === 4 && c[3] === 1)) { bg = c.slice(0, 3); break; }
    }
    out.push({tag: el.tagName, cls: el.className, fg: rgb(st.color).slice(0, 3),
              alpha: rgb(st.color)[3], bg: bg || [255, 255, 255],
              text: el.textContent.trim().slice(0, 40)});
  }
  return out;
}"""


def _hex(c: list[float]) -> str:
    return "#" + "".join(f"{round(v):02x}" for v in c)


@pytest.mark.browser
@pytest.mark.parametrize("width", [1280, 390])
def test_html_in_browser_fits_loads_and_reads(browser: Any, record: Path, width: int) -> None:
    page, seen = _open(browser, record / "briefing.html", width)
    try:
        images = page.evaluate("[...document.images].map(i => [i.complete, i.naturalWidth])")
        assert images
        assert all(ok and w > 0 for ok, w in images), images
        scroll = page.evaluate("document.documentElement.scrollWidth")
        assert scroll <= width, f"page overflows: {scroll} px wide in a {width} px window"
        assert seen["errors"] == []
        assert seen["blocked"] == []
        low = []
        for item in page.evaluate(_CONTRASTS_JS):
            assert item["alpha"] in (None, 1), item  # opaque text only, so the formula applies
            ratio = contrast_ratio(_hex(item["fg"]), _hex(item["bg"]))
            if ratio < 4.5:
                low.append((item["tag"], item["cls"], item["text"], round(ratio, 2)))
        assert low == [], low  # WCAG 2.2 SC 1.4.3 (AA): 4.5:1
        ARTIFACTS.mkdir(parents=True, exist_ok=True)
        page.screenshot(path=str(ARTIFACTS / f"briefing-{width}.png"), full_page=True)
    finally:
        page.close()


@pytest.mark.browser
def test_hostile_model_name_runs_no_script_in_browser(
    browser: Any, facts: Any, tmp_path: Path
) -> None:
    hostile = _hostile_facts(facts)
    path = tmp_path / "hostile.html"
    path.write_text(render_html(hostile, build_narrative(hostile), ()), encoding="utf-8")
    page, seen = _open(browser, path, 1280)
    try:
        assert page.evaluate("document.scripts.length") == 0
        assert HOSTILE in page.inner_text("main")
        page.wait_for_timeout(200)
        assert seen["dialogs"] == []
        assert seen["errors"] == []
    finally:
        page.close()
