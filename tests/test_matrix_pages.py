"""The applications matrix's pages planned ahead (reportgen.report.matrix_pages): every row
once and in order, continuations marked, and, rendered by WeasyPrint, every planned page
fits on one page (slow)."""
from __future__ import annotations

import dataclasses
import random
from datetime import datetime
from pathlib import Path

import pytest

from builders import make_link, make_project
from reportgen.engine.applications import assess_project
from reportgen.engine.judge import judge_project
from reportgen.model import FiberType, Paper, Project, ReportLanguage, ReportOptions
from reportgen.pdf.weasy import render_part
from reportgen.report.matrix_pages import matrix_runs, plan_pages, row_pt
from reportgen.report.render import ReportDocument, build_report
from reportgen.report.view_apps import MatrixCell, MatrixGroup, MatrixRow

NOW = datetime(2030, 2, 1, 12, 0)


def _group(fiber: str, count: int, start: int = 0) -> MatrixGroup:
    cells = (MatrixCell("supported", True), MatrixCell("untested", False))
    rows = tuple(MatrixRow(f"M-{n:04d}", f"link-m-{n:04d}", cells) for n in range(start, start + count))
    return MatrixGroup(fiber, ("10GBASE-SR", "40GBASE-SR4"), rows)


def test_every_row_is_on_one_planned_page_in_order_and_continuations_are_marked() -> None:
    groups = (_group("OM4", 130), _group("OS2", 70, start=130))
    pages = plan_pages(groups, "a4")
    slices = [group for page in pages for group in page]
    assert [row for group in slices for row in group.rows] == [*groups[0].rows, *groups[1].rows]
    assert len(pages) >= 4 and all(pages)
    for fiber in ("OM4", "OS2"):
        mine = [group for group in slices if group.fiber_type == fiber]
        assert [group.continued for group in mine] == [False] + [True] * (len(mine) - 1)
    runs = matrix_runs(pages, 2)
    assert len(runs) == -(-len(pages) // 2)
    # within a run, each page after the first starts a new page: its first slice says so
    starts = [sum(group.page_start for group in run) for run in runs]
    assert starts == [min(2, len(pages) - 2 * index) - 1 for index in range(len(runs))]


def test_no_matrix_is_one_empty_page_and_one_run() -> None:
    assert plan_pages((), "a4") == [()]
    assert matrix_runs([()]) == [()]


def test_a_long_link_id_makes_a_taller_row() -> None:
    short = MatrixRow("M-1", "link-m-1", ())
    long = MatrixRow("M-" + "9" * 60, "link-m-2", ())
    assert row_pt(long) > 2 * row_pt(short) * 0.9


def _project(count: int, paper: Paper, language: ReportLanguage) -> Project:
    rng = random.Random(3)
    links, results = [], []
    for n in range(count):
        link_id = f"M-{n:04d}" + ("-" + "RISER" * rng.choice((0, 0, 0, 3, 6)) if n % 5 == 0 else "")
        fiber = FiberType.OS2 if n % 3 == 0 else FiberType.OM4
        apps = ("10GBASE-LR",) if fiber == FiberType.OS2 else ("10GBASE-SR", "40GBASE-SR4")
        links.append(make_link(link_id, fiber_type=fiber, length_m=100.0, applications=apps))
        for wavelength in ((1310, 1550) if fiber == FiberType.OS2 else (850, 1300)):
            for direction in ("ab", "ba"):
                results.append(dict(link_id=link_id, wavelength_nm=wavelength,
                                    direction=direction, loss_db=1.0 + (n % 9) * 0.3))
    return dataclasses.replace(make_project(links, results),
                               report=ReportOptions(paper=paper, language=language))


def _document(count: int, paper: Paper, language: ReportLanguage) -> ReportDocument:
    project = _project(count, paper, language)
    judgement = judge_project(project)
    return build_report(project, judgement, now=NOW, version="9.9-test",
                        applications=assess_project(project, judgement))


@pytest.mark.slow
@pytest.mark.parametrize(("paper", "language"), [(Paper.A4, ReportLanguage.EN),
                                                 (Paper.LETTER, ReportLanguage.DE)])
def test_each_planned_page_fits_on_one_rendered_page(paper: Paper, language: ReportLanguage) -> None:
    document = _document(240, paper, language)
    pieces = [body for body in document.bodies if 'class="grid matrix"' in body]
    assert len(pieces) >= 2
    for piece in pieces:
        planned = piece.count('<h3 class="matrix-group page-start"') + 1
        part = render_part(piece, Path("."), xml_first=True)
        assert part.page_count == planned, f"{planned} pages planned, {part.page_count} rendered"
