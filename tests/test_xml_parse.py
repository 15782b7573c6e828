"""The fast parse route: our templates' HTML read as XML gives the tree an HTML5 parser gives.

WeasyPrint parses with tinyhtml5 (an HTML5 parser following the WHATWG parsing
algorithm). The PDF engine reads our own templates' output with the standard
library's XML parser instead (reportgen.pdf.weasy.parse_xml). That is only right if
both parsers build the same tree, which these tests check on every document of the
demo report and of a report full of hostile text, and if the pages come out the same,
which they check byte for byte.
"""
from __future__ import annotations

import dataclasses
import itertools
import xml.etree.ElementTree as ET
from datetime import datetime
from pathlib import Path

import pytest
import tinyhtml5

from builders import make_link, make_project
from reportgen import pipeline
from reportgen.engine.judge import judge_project
from reportgen.pdf.engine import PageMap
from reportgen.pdf.weasy import parse_xml, render_part
from reportgen.report.render import ReportDocument, build_report

DEMO = Path(__file__).resolve().parent.parent / "demo_project"
NOW = datetime(2030, 2, 1, 12, 0)
HOSTILE = '<script>alert(1)</script>"><img src=x onerror=alert(1)>&amp; &nbsp; {{ 7*7 }} \u202e'
# The HTML5 parser keeps xmlns as an attribute; in XML it is a namespace declaration.
XMLNS_ATTRIBUTE = "{http://www.w3.org/2000/xmlns/}xmlns"


@pytest.fixture(scope="module")
def demo_document() -> ReportDocument:
    project = pipeline.validate_only(DEMO)
    outcome = pipeline.compute(project)
    return build_report(project, outcome.judgement, now=NOW, version="9.9-test",
                        applications=outcome.applications)


def hostile_document() -> ReportDocument:
    links = [make_link(HOSTILE, end_a=HOSTILE, end_b=HOSTILE, notes=HOSTILE)]
    project = make_project(links, [dict(link_id=HOSTILE, wavelength_nm=850, loss_db=1.0,
                                        technician=HOSTILE, note=HOSTILE)])
    info = dataclasses.replace(project.info, title=HOSTILE, customer=HOSTILE, site=HOSTILE)
    project = dataclasses.replace(project, info=info)
    return build_report(project, judge_project(project), now=NOW, version="9.9-test")


def documents(doc: ReportDocument) -> list[str]:
    return [doc.html, doc.front(PageMap({}, 999), 999), *doc.bodies]


def signature(element: ET.Element, last_in_body: bool) -> tuple[object, ...]:
    attributes = sorted((key, value) for key, value in element.attrib.items()
                        if key != XMLNS_ATTRIBUTE)
    tail = element.tail
    if last_in_body and tail is not None and not tail.strip():
        tail = None  # the HTML5 parser moves blanks after </body> into the body
    return element.tag, attributes, element.text, tail


def tree_signatures(root: ET.Element) -> list[tuple[object, ...]]:
    body = root.find("body")
    last = body[-1] if body is not None and len(body) else None
    return [signature(element, element is last) for element in root.iter()]


def assert_same_tree(html: str) -> None:
    xml_root = parse_xml(html)
    assert xml_root is not None, "our templates must write well-formed XML"
    html5_root = tinyhtml5.parse(html, namespace_html_elements=False)
    for index, (ours, reference) in enumerate(itertools.zip_longest(
            tree_signatures(xml_root), tree_signatures(html5_root))):
        assert ours == reference, f"element {index} differs"


def test_demo_report_parses_to_the_html5_tree(demo_document: ReportDocument) -> None:
    for html in documents(demo_document):
        assert_same_tree(html)


def test_hostile_text_parses_to_the_html5_tree() -> None:
    doc = hostile_document()
    for html in documents(doc):
        assert_same_tree(html)
    assert doc.own_templates


@pytest.mark.slow  # renders two demo parts twice with WeasyPrint
def test_both_routes_give_byte_identical_pages(demo_document: ReportDocument) -> None:
    for html in (demo_document.bodies[0], demo_document.bodies[-1]):
        fast = render_part(html, DEMO, xml_first=True)
        plain = render_part(html, DEMO, xml_first=False)
        assert fast.pdf == plain.pdf
        assert (fast.pages, fast.anchors, fast.bookmarks) == (
            plain.pages, plain.anchors, plain.bookmarks)


def test_html_that_is_not_xml_falls_back_to_the_html_parser(tmp_path: Path) -> None:
    html = "<html><head><title>t</title></head><body><p>one<br>two &nbsp;three<p>four</body></html>"
    assert parse_xml(html) is None
    fast = render_part(html, tmp_path, xml_first=True)
    plain = render_part(html, tmp_path, xml_first=False)
    assert fast.pdf == plain.pdf


def test_project_templates_are_parsed_as_html(tmp_path: Path) -> None:
    project = make_project([make_link("L1")], [dict(link_id="L1", wavelength_nm=850,
                                                    loss_db=1.0)])
    own = build_report(project, judge_project(project), now=NOW, version="9.9-test")
    (tmp_path / "tpl").mkdir()
    report = dataclasses.replace(project.report, templates=tmp_path / "tpl")
    theirs = dataclasses.replace(project, report=report)
    other = build_report(theirs, judge_project(theirs), now=NOW, version="9.9-test")
    assert own.own_templates and not other.own_templates
