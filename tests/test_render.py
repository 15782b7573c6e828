"""Rendering the report: content, escaping, strictness, template overrides, PDF parts."""
from __future__ import annotations

import dataclasses
import re
from datetime import datetime
from pathlib import Path

import jinja2
import pytest
from hypothesis import given, settings, strategies as st

from builders import make_link, make_project, well_formed
from reportgen.report import formats, messages, messages_appendix
from reportgen.engine.judge import judge_project
from reportgen.model import Paper, ReportOptions
from reportgen.report.documents import LazyDocuments, squeeze_html, squeezed_pieces
from reportgen.report.render import build_report, css_string
from reportgen.report.link_views import link_anchors

NOW = datetime(2030, 2, 1, 12, 0)
HOSTILE_SCRIPT = "<script>alert(1)</script>"
HOSTILE_ATTR = '"><img src=x onerror=alert(1)>'
HOSTILE_TEMPLATE = "{{ 7*7 }}"


def mixed_project(**kwargs):
    """L-PASS passes, L-FAIL fails at 850 nm, L-INC lacks results (limits: builders.TEST_LIMITS)."""
    links = [make_link("L-PASS"), make_link("L-FAIL"), make_link("L-INC")]
    results = []
    for link_id, loss in (("L-PASS", 1.0), ("L-FAIL", 2.5)):
        for wl in (850, 1300):
            for direction in ("ab", "ba"):
                results.append(dict(link_id=link_id, wavelength_nm=wl, direction=direction,
                                    loss_db=loss if wl == 850 else 1.0))
    results.append(dict(link_id="L-INC", wavelength_nm=850, loss_db=1.0))
    return make_project(links, results, **kwargs)


def render(project, **kwargs):
    return build_report(project, judge_project(project), now=NOW, version="9.9-test", **kwargs)


def test_every_link_id_and_verdict_appears_and_html_is_well_formed():
    doc = render(mixed_project())
    ids = well_formed(doc.html)
    assert len(ids) == len(set(ids)), "element ids must be unique"
    for link_id, verdict in (("L-PASS", "pass"), ("L-FAIL", "fail"), ("L-INC", "incomplete")):
        assert link_id in doc.html
        sheet = doc.html.split(f'id="{link_anchors([link_id])[link_id]}"')[1].split("</section>")[0]
        assert f"&#8202;{verdict}</span>" in sheet
    # Numbers: 0.5 km x 2.0 dB/km + 2 x 0.5 dB = 2.00 dB limit at 850 nm (hand-worked from
    # the formula, builders.TEST_LIMITS); L-FAIL's 2.50 dB gives a margin of -0.50 dB.
    assert ">2.00<" in doc.html and ">-0.50<" in doc.html
    assert "9.9-test" in doc.html and "2030-02-01" in doc.html


def test_parts_follow_the_pdf_contract(tmp_path):
    project = mixed_project()
    doc = render(project)
    # the cover, then the rest of the front matter in three pieces (contents and links
    # needing action, register, charts), one run of link sheets, the appendix (no input
    # files are listed without the archive, so no part for them)
    assert len(doc.bodies) == 5
    front = doc.front({"link-l-pass": 7, "link-l-fail": 8, "link-l-inc": 9, "appendix": 10}, 12)
    for part in (front, *doc.bodies):
        assert part.startswith("<!DOCTYPE html>") and "size: A4" in part
        well_formed(part)
    assert 'id="cover"' in front and 'id="contents"' not in front
    lists, register, charts, sheets, appendix = doc.bodies
    assert 'id="contents"' in lists and 'id="needs-action"' in lists and 'id="register"' not in lists
    assert 'id="register"' in register and 'id="charts"' in charts
    assert 'id="link-l-fail"' in sheets and 'data-bookmark-level="2"' in sheets
    assert 'id="appx-safety"' in appendix and 'id="cover"' not in appendix
    # page numbers of the PDF parts are slots, filled in after the merge
    assert '<a class="page-slot" href="#link-l-fail"></a>' in register
    # a project's own templates keep the front matter in one part, which prints the
    # numbers it is given (the engine then lays it out again until they settle)
    own = render(dataclasses.replace(project, report=ReportOptions(templates=tmp_path)))
    assert len(own.bodies) == 2  # one run of link sheets, then the appendix
    own_front = own.front({"link-l-pass": 7, "link-l-fail": 8, "link-l-inc": 9, "appendix": 10}, 12)
    assert '<a href="#link-l-fail">8</a>' in own_front and 'id="charts"' in own_front
    assert "@bottom-right" not in doc.html  # left empty for the page stamp
    letter = render(dataclasses.replace(project, report=ReportOptions(paper=Paper.LETTER)))
    assert "size: letter" in letter.bodies[0]


def test_same_input_same_html():
    assert render(mixed_project()).html == render(mixed_project()).html


def test_hostile_text_is_escaped_everywhere():
    links = [make_link(HOSTILE_SCRIPT, end_a=HOSTILE_ATTR, end_b=HOSTILE_TEMPLATE,
                       notes=HOSTILE_SCRIPT + HOSTILE_TEMPLATE)]
    project = make_project(links, [dict(link_id=HOSTILE_SCRIPT, wavelength_nm=850, loss_db=1.0,
                                        technician=HOSTILE_ATTR, note=HOSTILE_SCRIPT)])
    info = dataclasses.replace(project.info, title=HOSTILE_SCRIPT + HOSTILE_ATTR,
                               customer=HOSTILE_TEMPLATE)
    doc = render(dataclasses.replace(project, info=info))
    for html in (doc.html, doc.front({}, 1), *doc.bodies):
        assert "<script" not in html
        assert "<img src=x" not in html
        well_formed(html)
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in doc.html
    assert HOSTILE_TEMPLATE in doc.html  # printed as text, never evaluated
    sheet = doc.html.split('id="link-script-alert-1-script"')[1].split("</section>")[0]
    assert HOSTILE_TEMPLATE in sheet and ">49<" not in sheet


def test_css_string_cannot_leave_the_style_element():
    text = css_string('a"b</style><script>x\\ y')
    assert all(ch not in text[1:-1] for ch in '"<>\\\n') or "\\" in text
    assert "</style>" not in text and '"b' not in text


def test_zero_results_one_link_and_a_failing_link_render():
    empty = render(make_project([make_link("ONLY")], []))
    assert "ONLY" in empty.html and messages.TEXT["no_results_dates"] in empty.html
    assert messages.TEXT["results_none"] in empty.html
    failing = render(make_project([make_link("F1")], [dict(link_id="F1", wavelength_nm=850, loss_db=9.0)]))
    assert "F1" in failing.html and messages.TEXT["action_heading"] in failing.html


def test_misspelt_template_variable_raises(tmp_path: Path):
    (tmp_path / "report.html.j2").write_text("<p>{{ report.titel }}</p>", encoding="utf-8")
    project = dataclasses.replace(mixed_project(), report=ReportOptions(templates=tmp_path))
    with pytest.raises(jinja2.UndefinedError):
        render(project)


def test_project_template_replaces_one_file_and_falls_back_for_others(tmp_path: Path):
    (tmp_path / "partials").mkdir()
    (tmp_path / "partials" / "appendix.html.j2").write_text(
        '<section id="appendix"><p>OUR OWN APPENDIX for {{ report.title }}</p></section>',
        encoding="utf-8")
    project = dataclasses.replace(mixed_project(), report=ReportOptions(templates=tmp_path))
    doc = render(project)
    assert "OUR OWN APPENDIX for T" in doc.html
    assert messages_appendix.SAFETY[0] not in doc.html  # ours replaced
    assert 'id="link-l-fail"' in doc.html  # the other files still ours


def test_link_anchors_are_unique_and_safe():
    anchors = link_anchors(["A/1", "a 1", "a-1", "", "<x>"])
    assert list(anchors.values()) == ["link-a-1", "link-a-1-2", "link-a-1-3", "link-x", "link-x-2"]


def test_number_formats():
    # Two decimals for dB everywhere; no negative zero (common practice in test reports).
    assert formats.format_db(-0.004) == "0.00"
    assert formats.format_db(1.25) == "1.25" and formats.format_db(-0.5) == "-0.50"
    assert formats.format_db(None) == messages.TEXT["no_margin"]
    # 1 ft = 0.3048 m exactly (international foot, 1959): 30.48 m is 100 ft.
    assert formats.format_length(30.48, "ft") == "100\u00a0ft"
    assert formats.format_length(79.94) == "79.9\u00a0m"
    assert messages.PAGE_LABEL.format(page=3, pages=9) == "Page 3 of 9"


def test_one_small_pdf_renders_with_the_link_text():
    weasyprint = pytest.importorskip("weasyprint")
    pypdf = pytest.importorskip("pypdf")
    import io

    doc = render(make_project([make_link("PDF-1")], [dict(link_id="PDF-1", wavelength_nm=850, loss_db=9.0)]))
    pdf = pypdf.PdfReader(io.BytesIO(weasyprint.HTML(string=doc.bodies[0]).write_pdf()))
    text = "".join(page.extract_text() or "" for page in pdf.pages)
    assert "PDF-1" in text and "fail" in text


def test_lazy_documents_read_like_a_tuple_and_keep_only_the_last_read():
    calls = []

    def maker(text):
        return lambda: calls.append(text) or text

    docs = LazyDocuments([maker("a"), maker("b"), maker("c")], keep=2)
    assert calls == []
    assert (len(docs), docs[-1], docs[0], docs[-1]) == (3, "c", "a", "c")
    assert calls == ["c", "a"]  # rendered when first read; read again while kept: not again
    assert (docs[1], docs[0]) == ("b", "a")  # b pushed a out of the two kept
    assert calls == ["c", "a", "b", "a"]  # a read again: rendered again, the same text
    assert (docs[1:], list(docs)) == (["b", "c"], ["a", "b", "c"])
    with pytest.raises(IndexError):
        docs[3]


BLOCKS = st.sampled_from(["<div>", "</div>", "<p>", "</p>", "<td class=\"x\">", "</tr>",
                          "<span>", "</span>", "<b>", "word", "a < b", " ", "  \n ", "\t", "<"])


@settings(max_examples=300, deadline=None)
@given(st.lists(BLOCKS, max_size=60), st.integers(min_value=1, max_value=40))
def test_html_squeezed_in_pieces_equals_squeezed_whole(chunks, size):
    # the pieces report.html is written in must join to the same text as squeezing it whole
    assert "".join(squeezed_pieces(chunks, size)) == squeeze_html("".join(chunks))


def test_report_html_written_in_pieces_equals_the_whole_text(tmp_path):
    document = render(mixed_project())
    target = tmp_path / "report.html"
    with target.open("wb") as handle:
        document.write_html(handle)
    assert target.read_bytes() == document.html.encode("utf-8")


def test_a_large_register_is_cut_into_parts_each_row_once(monkeypatch):
    from reportgen.report import page_plan

    monkeypatch.setattr(page_plan, "PAGES_PER_PART", 1)
    links = [make_link(f"R-{n:03d}") for n in range(120)]
    results = [dict(link_id=f"R-{n:03d}", wavelength_nm=850, loss_db=1.0) for n in range(120)]
    document = render(make_project(links, results))
    pieces = [body for body in document.bodies[:document.front_bodies]
              if 'class="grid register-table' in body]
    assert len(pieces) == 3  # about 45 rows to a planned A4 page, a page to a part
    assert [piece.count('id="register"') for piece in pieces] == [1, 0, 0]  # heading once
    rows = [row for piece in pieces for row in re.findall(r'<td class="link-id"><a href="#(link-r-\d+)"', piece)]
    assert rows == [f"link-r-{n:03d}" for n in range(120)]
    # report.html keeps one register with every row
    assert document.html.count('class="grid register-table') == 1


def test_our_templates_render_the_same_text_as_in_the_sandbox(monkeypatch):
    # Our own templates render outside Jinja's sandbox (speed); a project's own templates
    # always inside it (tests/test_hardening.py). Same text either way: the demo project.
    from jinja2.sandbox import ImmutableSandboxedEnvironment

    from reportgen.inputs.project import load_project
    from reportgen.report import render as render_module

    project = load_project(Path(__file__).resolve().parent.parent / "demo_project")
    plain = render_module.make_environment(None)
    assert type(plain) is jinja2.Environment
    assert isinstance(render_module.make_environment(Path(".")), ImmutableSandboxedEnvironment)
    ours = render(project)
    texts = (ours.html, [ours.bodies[i] for i in range(len(ours.bodies))])
    render_module.make_environment.cache_clear()
    monkeypatch.setattr(render_module.jinja2, "Environment", ImmutableSandboxedEnvironment)
    try:
        sandboxed = render(project)
        assert type(render_module.make_environment(None)) is ImmutableSandboxedEnvironment
        assert (sandboxed.html, [sandboxed.bodies[i] for i in range(len(sandboxed.bodies))]) == texts
    finally:
        render_module.make_environment.cache_clear()
