"""The trustees' HTML summary, parsed back with the standard library's html.parser.

Most checks use the real demo run (tests.test_reports_fixture.real_run); the hand-made result adds probes
in the basis and sensitivity names. Sources: the results contract (summary.json); WHATWG HTML Living Standard, section 13.1.2 "Elements"
(void elements need no end tag; every other element we write is closed in order) and 13.1.2.6 on
escaping: text ``<`` must appear as ``&lt;`` (from memory); OWASP XSS Prevention Cheat Sheet, rule #1
(HTML-escape untrusted data in element content and attribute values); CSS Paged Media Level 3
(``@page { size: A4 }``).
"""

from __future__ import annotations

import html
import re
from html.parser import HTMLParser

import polars as pl
import pytest

from tests.reports_tools import with_frequent_probes
from tests.test_reports_fixture import (
    IMG_PROBE,
    SCRIPT_PROBE,
    make_empty_result,
    make_experience,
    make_result,
    real_run,
)
from valuation.engine.results import ValuationResult
from valuation.reports import write_html
from valuation.reports.content import TOP_REASONS
from valuation.reports.html import render_html

VOID = {"area", "base", "br", "col", "embed", "hr", "img", "input", "link", "meta", "source", "track", "wbr"}


class Page(HTMLParser):
    """Collects tags, attributes, text and the value spans; checks that elements nest and close."""

    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.stack: list[str] = []
        self.errors: list[str] = []
        self.tags: list[tuple[str, dict[str, str | None]]] = []
        self.text: list[str] = []
        self.values: dict[str, str] = {}
        self._key: str | None = None
        self.styles: list[str] = []
        self._in_style = False

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        a = dict(attrs)
        self.tags.append((tag, a))
        if tag not in VOID:
            self.stack.append(tag)
        if tag == "span" and a.get("data-key"):
            self._key = a["data-key"]
            self.values[self._key] = ""
        self._in_style = tag == "style"

    def handle_startendtag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        self.tags.append((tag, dict(attrs)))

    def handle_endtag(self, tag: str) -> None:
        if not self.stack or self.stack[-1] != tag:
            self.errors.append(f"</{tag}> closes {self.stack[-1:] or 'nothing'}")
        else:
            self.stack.pop()
        if tag == "span":
            self._key = None
        self._in_style = False

    def handle_data(self, data: str) -> None:
        self.text.append(data)
        if self._key:
            self.values[self._key] += data
        if self._in_style:
            self.styles.append(data)


def words(page: Page) -> str:
    """The page's text, one space between text nodes and runs of whitespace collapsed."""
    return " ".join(" ".join(page.text).split())


def parse(text: str) -> Page:
    page = Page()
    page.feed(text)
    page.close()
    return page


@pytest.fixture(scope="module")
def probed() -> ValuationResult:
    """The real run with the probe reasons made common enough to be among the reasons the page lists."""
    return with_frequent_probes(real_run()[0], [SCRIPT_PROBE, IMG_PROBE])


@pytest.fixture(scope="module")
def page_text(tmp_path_factory: pytest.TempPathFactory, probed: ValuationResult) -> str:
    path = write_html(probed, tmp_path_factory.mktemp("html") / "out" / "summary.html", real_run()[1])
    return path.read_text(encoding="utf-8")


@pytest.fixture(scope="module")
def made_text() -> str:
    return render_html(make_result(), make_experience())


def test_parses_and_every_element_is_closed(page_text: str) -> None:
    page = parse(page_text)
    assert page.errors == []
    assert page.stack == []
    assert page_text.startswith("<!DOCTYPE html>")


def test_headline_figures_equal_the_summary(page_text: str) -> None:
    """Each headline is the summary's number, formatted here independently of the library."""
    s = real_run()[0].summary
    values = parse(page_text).values
    assert values["total_liability"] == f"{round(s.liability.total):,}"
    assert values["duration"] == f"{s.duration.macaulay:.1f} years"
    assert values["sedr"] == f"{100 * s.single_equivalent_discount_rate:.2f}%"
    assert values["members_valued"] == f"{s.records.valued:,}"
    assert values["service_cost"] == f"{round(s.active_measures.current_service_cost):,}"


@pytest.mark.parametrize("which", ["page_text", "made_text"])
def test_member_and_basis_text_is_escaped(which: str, request: pytest.FixtureRequest) -> None:
    """OWASP rule #1: the probes appear as text (&lt;script&gt;), never as live elements or handlers."""
    text_html = request.getfixturevalue(which)
    page = parse(text_html)
    assert "script" not in {t for t, _ in page.tags}
    assert "img" not in {t for t, _ in page.tags}
    assert not any(k.startswith("on") for _, a in page.tags for k in a)
    text = "".join(page.text)
    assert SCRIPT_PROBE in text and IMG_PROBE in text
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in text_html
    assert SCRIPT_PROBE not in text_html and "<img" not in text_html


def test_basis_and_sensitivity_names_are_escaped(made_text: str) -> None:
    """The hand-made result carries the probe in the basis name, a table name and a sensitivity name."""
    page = parse(made_text)
    assert page.errors == []
    assert "".join(page.text).count(SCRIPT_PROBE) >= 4


def test_no_external_urls(page_text: str) -> None:
    """Self-contained: no src/href to the network, no stylesheet links, no remote CSS."""
    page = parse(page_text)
    for tag, attrs in page.tags:
        for name in ("src", "href", "xlink:href", "action", "data"):
            value = (attrs.get(name) or "").strip().lower()
            assert not value.startswith(("http", "//", "ftp")), (tag, name, value)
            if value and tag in ("use",):
                assert value.startswith("#")
        assert tag not in ("link", "script", "iframe", "object")
    css = "".join(page.styles).lower()
    assert "http" not in css and "@import" not in css and "url(" not in css


def test_print_stylesheet_for_a4(page_text: str) -> None:
    """CSS Paged Media: an @page rule with size A4, and print-only rules."""
    css = "".join(parse(page_text).styles)
    assert "@page" in css and "size: A4" in css
    assert "@media print" in css


def test_sections_charts_and_cautions(page_text: str) -> None:
    page = parse(page_text)
    ids = {a.get("id") for t, a in page.tags if t == "section"}
    assert {"headline", "by-group", "payments", "assumptions", "sensitivities", "life-expectancy", "experience",
            "data", "cautions"} <= ids
    assert sum(1 for t, _ in page.tags if t == "svg") == 3
    text = words(page)
    assert "not advice" in text and "qualified actuary" in text and "depend on the assumptions" in text
    assert "4.80% a year" in text  # discount rate 0.048 of assumptions/demo_basis.toml, in words
    assert "95% of table DEMO_M" in text  # mortality.default.M percentage = 0.95


def test_tables_show_the_result_figures(page_text: str) -> None:
    """Sensitivities, life expectancies and A/E are the result's numbers, formatted independently."""
    result, experience = real_run()
    text = words(parse(page_text))
    for r in result.sensitivities.iter_rows(named=True):
        assert f"{r['name']} {round(r['liability']):,} {r['change_pct']:+.1f}%" in text
    for r in result.life_expectancy.iter_rows(named=True):
        assert f"{r['years']:.1f} years" in text
    overall = experience.overall()
    assert f"{100 * overall['ae_lives']:.0f}%" in text
    assert f"{100 * overall['ae_lives_lower']:.0f}% to {100 * overall['ae_lives_upper']:.0f}%" in text


def _reason_rows(page_html: str) -> list[tuple[str, str, int]]:
    """(outcome, reason, records) of the "Data problems found" table."""
    table = page_html[page_html.index("Data problems found"):]
    table = table[:table.index("</table>")]
    rows = []
    for row in re.findall(r"<tr>(.*?)</tr>", table, flags=re.S):
        cells = [html.unescape(re.sub(r"<[^>]+>", "", c)).strip() for c in re.findall(r"<td[^>]*>(.*?)</td>", row, flags=re.S)]
        if len(cells) == 3:
            rows.append((cells[0], " ".join(cells[1].split()), int(cells[2].replace(",", ""))))
    return rows


def test_data_section_counts_reasons_from_exceptions(page_text: str, probed: ValuationResult) -> None:
    """The page lists the commonest kinds of problem (issue 9: at most TOP_REASONS, records left out first,
    then those valued with a warning, each by count), each with its count from the exceptions."""
    counts = (probed.exceptions.group_by("severity", "reason").len()
              .with_columns((pl.col("severity") != "excluded").alias("warning_only"))
              .sort(["warning_only", "len", "reason"], descending=[False, True, False]))
    assert counts.height > TOP_REASONS  # the demo's dirty file has more kinds than the page lists
    shown = _reason_rows(page_text)
    expected = [("Left out" if sev == "excluded" else "Valued, with a warning", " ".join(reason.split()), n)
                for sev, reason, n in counts.head(TOP_REASONS).select("severity", "reason", "len").iter_rows()]
    assert shown == expected
    assert any(SCRIPT_PROBE in reason for _, reason, _ in shown)
    more = counts.height - TOP_REASONS
    text = words(parse(page_text))
    assert f"and {more} more kind{'s' if more > 1 else ''} of problem" in text
    rec = probed.summary.records
    assert f"{rec.read} records were read: {rec.valued} were valued and {rec.excluded} were left out" in text


def test_without_experience_no_experience_section() -> None:
    page = parse(render_html(make_result()))
    assert "experience" not in {a.get("id") for t, a in page.tags if t == "section"}
    assert sum(1 for t, _ in page.tags if t == "svg") == 2


def test_empty_result_renders_with_missing_figures_marked() -> None:
    page = parse(render_html(make_empty_result()))
    assert page.errors == [] and page.stack == []
    assert page.values["sedr"] == "n/a" and page.values["duration"] == "n/a"
    text = words(page)
    assert "No sensitivities were run." in text and "None: every record was valued without a warning." in text


def test_chart_labels_are_rebuilt_from_numbers() -> None:
    """The SVG is marked safe, so age-band labels are rebuilt from their digits; anything else is replaced."""
    from valuation.reports.charts import band_labels

    assert band_labels(["60-64", SCRIPT_PROBE, " 100-104 ", "9-"]) == ["60-64", "band 2", "100-104", "band 4"]


def test_charts_have_text_alternatives_and_the_page_has_landmarks(page_text: str) -> None:
    """WCAG 2.1 SC 1.1.1 (non-text content) and WAI-ARIA landmarks: every chart is an image with a name
    (aria-label, <title>) and a description (<desc>) that give its figures; everything on the page sits in
    <header>, <main> or <footer>."""
    page = parse(page_text)
    svgs = [a for t, a in page.tags if t == "svg"]
    assert len(svgs) == 3
    for attrs in svgs:
        assert attrs.get("role") == "img" and len(attrs.get("aria-label") or "") > 40
        assert attrs.get("aria-describedby")
    assert page_text.count("<title>") == 1 + 3 and page_text.count("<desc ") == 3  # the page's own, then charts'
    assert "Pensioners GBP" in page_text  # the group chart's alternative names each group's liability
    body = page_text[page_text.index("<body>") + len("<body>"):page_text.index("</body>")]
    outside = re.sub(r"<(header|main|footer)\b.*?</\1>", "", body, flags=re.S)
    assert outside.strip() == ""
    assert [t for t, _ in page.tags if t in ("header", "main", "footer")][:3] == ["header", "main", "footer"]


def test_ae_chart_marks_intervals_past_its_axis() -> None:
    """An interval whose upper limit is above the axis's top (at most AE_AXIS_MAX) ends in an arrow marker
    at the edge with the limit written beside it, and the text alternative says so; none when all fit."""
    from valuation.reports.charts import ae_by_age
    from valuation.reports.content import AE_AXIS_MAX

    bands = pl.DataFrame({"group": ["60-64", "65-69"], "expected_lives": [2.0, 8.0], "ae_lives": [1.5, 1.0],
                          "ae_lives_lower": [0.4, 0.6], "ae_lives_upper": [7.36, 1.6]})
    svg = ae_by_age(bands)
    assert AE_AXIS_MAX < 736.0
    assert "736%" in svg and "past the top of the axis" in svg
    assert "Interval runs past the top" in svg  # the legend entry of the arrow marker
    fits = ae_by_age(bands.with_columns(pl.Series("ae_lives_upper", [2.5, 1.6])))
    assert "past the top" not in fits and "Interval runs past the top" not in fits
