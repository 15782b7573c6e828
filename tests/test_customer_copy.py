"""The customer's copy: honest about each value's status, in the right place and words.

The report is read by an owner or auditor: link sheets cite the standard and table; the
appendix states each value's status in plain words; the cover says in one line whether any
value used is unconfirmed; the project folder's own file names stay out of the report's text.
The demo project uses tia-568.3-d, whose attenuation values are recalled, not checked
(reference-values §1: "from memory"), and whose connection allowance is checked (§2:
"verified, secondary").
"""
from __future__ import annotations

import re
from datetime import datetime
from pathlib import Path

import pytest

from reportgen.engine.applications import assess_project
from reportgen.engine.judge import judge_project
from reportgen.inputs.apptable import load_applications
from reportgen.inputs.project import load_project
from reportgen.report.render import build_report

ROOT = Path(__file__).resolve().parent.parent
NOW = datetime(2030, 2, 1, 12, 0)


@pytest.fixture(scope="module")
def demo_html() -> str:
    project = load_project(ROOT / "demo_project")
    judgement = judge_project(project)
    return build_report(project, judgement, now=NOW, version="9.9-test",
                        applications=assess_project(project, judgement)).html


def _text(html: str) -> str:
    return " ".join(re.sub(r"<[^>]+>", " ", html).split())


def _sheets(html: str) -> list[str]:
    return re.findall(r'<section class="sheet.*?</section>', html, flags=re.S)


def test_link_sheets_cite_without_status_words(demo_html):
    sheets = _sheets(demo_html)
    assert len(sheets) == 30
    for sheet in sheets:
        text = _text(sheet)
        assert "from memory" not in text and "LOW confidence" not in text
        assert "verified, secondary" not in text
    # the citation is kept: standard and table
    assert "ANSI/TIA-568.3-D, cabled multimode attenuation" in _text(sheets[0])


def test_appendix_states_each_value_status_in_customer_words(demo_html):
    appendix = _text(demo_html.split('id="appendix"', 1)[1])
    assert "checked against a published reproduction of the table" in appendix  # 0.75 dB
    assert "not checked against the standard\u2019s text: confirm with your copy" in appendix
    assert "from memory" not in appendix and "verified, secondary" not in appendix


def test_cover_says_in_one_line_whether_a_value_is_unconfirmed(demo_html):
    cover = demo_html.split('id="cover"', 1)[1].split("</section>", 1)[0]
    [line] = re.findall(r'<p class="values-status[^"]*">(.*?)</p>', cover, flags=re.S)
    assert "not yet checked against the standard\u2019s text" in line


def test_no_project_file_names_in_the_report_text(demo_html):
    # The appendix's list of input files is evidence (path, size, SHA-256) and names every
    # file on purpose; everywhere else the report speaks of links and results, not files.
    words = re.sub(r'<section id="appx-files".*?</section>', "", demo_html, flags=re.S)
    assert 'id="appx-files"' in demo_html
    text = _text(words)
    for name in ("links.csv", "project.yaml", "testing.attenuators_db"):
        assert name not in text, name


def test_phone_number_is_kept_whole_on_the_cover(demo_html):
    # "+00 000 000 0000" must not break after its first group (no logo or with one)
    assert '<span class="nowrap">+00 000 000 0000</span>' in demo_html
    assert re.search(r"\.nowrap\s*\{\s*white-space:\s*nowrap", (ROOT / "templates" / "report.css").read_text(encoding="utf-8"))


def test_headings_are_kept_with_what_follows():
    css = (ROOT / "templates" / "print.css").read_text(encoding="utf-8")
    assert re.search(r"h1, h2, h3 \{ break-after: avoid; \}", css)
    assert re.search(r"\.keep-together \{ break-inside: avoid; \}", css)


def test_charts_heading_is_kept_with_its_first_chart(demo_html):
    charts = demo_html.split('id="charts"', 1)[1]
    keep = charts.split('<div class="keep-together">', 1)[1].split("</div>", 1)[0]
    assert "Margins at a glance" in keep and "<img" in keep


def test_docs_list_every_application_id_of_the_table():
    doc = (ROOT / "docs" / "project-format.md").read_text(encoding="utf-8")
    block = doc.split("<!-- application ids: begin -->", 1)[1].split(
        "<!-- application ids: end -->", 1)[0]
    listed = re.findall(r"`([^`]+)`", block)
    assert listed == list(load_applications().ids)
