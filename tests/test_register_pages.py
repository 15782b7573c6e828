"""The register's pages planned ahead (reportgen.report.register_pages): every row once and
in order, and, rendered by WeasyPrint, every planned page fits on one page (slow)."""
from __future__ import annotations

import dataclasses
import random
import re
from datetime import datetime
from pathlib import Path

import pytest

from builders import make_link, make_project
from reportgen.engine.judge import judge_project
from reportgen.model import Paper, Project, ReportLanguage, ReportOptions
from reportgen.pdf.weasy import render_part
from reportgen.report import page_plan
from reportgen.report.page_plan import lines_needed
from reportgen.report.register_pages import RegisterPlanner, register_runs
from reportgen.report.render import ReportDocument, build_report
from reportgen.report.text_width import text_width
from reportgen.report.link_views import LinkView
from reportgen.report.viewmodel import build_view

NOW = datetime(2030, 2, 1, 12, 0)
ROW = re.compile(r'<td class="link-id"><a href="#([^"]+)"')


def test_a_text_that_fits_takes_one_line_and_wraps_at_a_space() -> None:
    size = 7.8
    both = page_plan.WIDTH_SLACK * text_width("alpha beta", size)
    one = page_plan.WIDTH_SLACK * text_width("alpha", size)
    assert lines_needed("alpha beta", both + 1, size) == 1
    assert lines_needed("alpha beta", (one + both) / 2, size) == 2
    assert lines_needed("alpha beta", 1000, size, wrap=False) == 1


def test_a_word_wider_than_its_box_is_broken_anywhere() -> None:
    # overflow-wrap: anywhere (report.css .grid td): ten "m" in a box four "m" wide
    size = 10.0
    four = page_plan.WIDTH_SLACK * text_width("mmmm", size)
    assert lines_needed("m" * 10, four + 0.01, size) == 3
    assert lines_needed("m" * 10, four + 0.01, size, wrap=False) == 1


def _links(count: int, seed: int = 7) -> list:
    """Links with end names from short to long enough to wrap over two or three lines."""
    rng = random.Random(seed)
    words = ["Building", "North", "Floor", "Riser", "Cabinet", "Patch panel", "Room",
             "Telecommunications", "Entrance"]
    links = []
    for n in range(count):
        ends = [" ".join(rng.choice(words) for _ in range(rng.choice((1, 1, 2, 4, 9))))
                + f" {n}" for _ in range(2)]
        links.append(make_link(f"R-{n:04d}", end_a=ends[0], end_b=ends[1]))
    return links


def _project(count: int, paper: Paper = Paper.A4,
             language: ReportLanguage = ReportLanguage.EN) -> Project:
    links = _links(count)
    results = [dict(link_id=link.link_id, wavelength_nm=850, loss_db=1.0 + (n % 7) * 0.4)
               for n, link in enumerate(links)]
    return dataclasses.replace(make_project(links, results),
                               report=ReportOptions(paper=paper, language=language))


def _document(count: int, paper: Paper = Paper.A4,
              language: ReportLanguage = ReportLanguage.EN) -> ReportDocument:
    project = _project(count, paper, language)
    return build_report(project, judge_project(project), now=NOW, version="9.9-test")


def _views(count: int) -> tuple[LinkView, ...]:
    project = _project(count)
    return build_view(project, judge_project(project), now=NOW, version="9.9-test").links


def test_every_row_is_on_one_planned_page_in_order() -> None:
    links = list(_views(300))
    pages = RegisterPlanner("a4").pages(links, "Every link.")
    assert [link for page in pages for link in page] == links
    assert all(pages)
    runs = register_runs(pages, 2)
    assert [run.pages for run in runs] == [tuple(pages[i:i + 2]) for i in range(0, len(pages), 2)]
    assert [run.first for run in runs] == [True] + [False] * (len(runs) - 1)
    assert [run.last for run in runs] == [False] * (len(runs) - 1) + [True]


def test_long_end_names_make_taller_rows_and_fuller_pages_hold_fewer() -> None:
    planner = RegisterPlanner("a4")
    short = _views(1)[0]
    long = dataclasses.replace(short, end_a="Room " * 30)
    assert planner.row_pt(long) > 2 * planner.row_pt(short)
    letter = RegisterPlanner("letter")
    assert len(letter.pages([short] * 200, "x")) >= len(planner.pages([short] * 200, "x"))


def test_report_html_keeps_one_register_table() -> None:
    document = _document(150)
    assert document.html.count('class="grid register-table') == 1
    pieces = [body for body in document.bodies[:document.front_bodies] if "register-table" in body]
    assert len(pieces) >= 2
    assert [row for piece in pieces for row in ROW.findall(piece)] == ROW.findall(document.html)[:150]


@pytest.mark.slow
@pytest.mark.parametrize(("paper", "language"), [(Paper.A4, ReportLanguage.EN),
                                                 (Paper.LETTER, ReportLanguage.DE),
                                                 (Paper.A4, ReportLanguage.FR)])
def test_each_planned_page_fits_on_one_rendered_page(paper: Paper, language: ReportLanguage) -> None:
    # The plan is an estimate from advance widths: WeasyPrint lays the pages out. Each
    # register part must take exactly as many pages as planned (a planned page that
    # overflowed would add a page holding a few rows).
    document = _document(260, paper, language)
    pieces = [body for body in document.bodies[:document.front_bodies] if "register-table" in body]
    assert len(pieces) >= 2
    for piece in pieces:
        planned = piece.count('<table class="grid register-table')
        part = render_part(piece, Path("."), xml_first=True)
        assert part.page_count == planned, f"{planned} pages planned, {part.page_count} rendered"
