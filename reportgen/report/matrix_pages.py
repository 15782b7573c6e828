"""The applications matrix's pages, planned before it is rendered (see
:mod:`reportgen.report.page_plan`): each page a few group slices, a few pages to a PDF part.
"""
from __future__ import annotations

from collections.abc import Sequence
from dataclasses import replace
from typing import Final

from reportgen.report import page_plan
from reportgen.report.i18n import ENGLISH, Language
from reportgen.report.messages import Words
from reportgen.report.page_plan import (
    INTRO_GAP_PT, INTRO_PT, LINE_HEIGHT, PAGE_PT, PAGE_SLACK_PT, PT_PER_MM, ROW_RULE_PT,
    TABLE_GAP_PT, TABLE_PT, lines_needed,
)
from reportgen.report.view_apps import MatrixGroup, MatrixRow

# report.css, table.matrix: rotated headings 24 mm tall over a rule, cells padded 0.5 mm
# above and below, 0.6 mm to the sides, the link column 30 mm wide; a mark is an inline
# block of line-height 1.25 in a 0.9 pt frame; h3.matrix-group (DejaVu Serif 9.5 pt) has
# 3 mm above and 1.5 mm below.
HEAD_PT: Final = 24 * PT_PER_MM + 0.8
ROW_PAD_PT: Final = 2 * 0.5 * PT_PER_MM
MARK_PT: Final = TABLE_PT * 1.25 + 2 * 0.9
LINK_COLUMN_PT: Final = (30 - 2 * 0.6) * PT_PER_MM
GROUP_HEADING_PT: Final = 9.5 * LINE_HEIGHT + (3 + 1.5) * PT_PER_MM
# The matrix's opening on its first page: h2 (DejaVu Serif 11.5 pt, 5 mm above, 2 mm
# below), the introduction (below) and the legend: two rows of marks, 1 mm above, 2 mm below.
OPENING_PT: Final = 11.5 * LINE_HEIGHT + 7 * PT_PER_MM + 2 * (MARK_PT + ROW_PAD_PT) + 3 * PT_PER_MM


def row_pt(row: MatrixRow) -> float:
    """Height of a row of the matrix: its link id may wrap in the link column."""
    lines = lines_needed(row.link_id, LINK_COLUMN_PT, TABLE_PT, bold=True)
    return max(lines * TABLE_PT * LINE_HEIGHT, MARK_PT) + ROW_PAD_PT + ROW_RULE_PT


def plan_pages(groups: Sequence[MatrixGroup], paper: str,
               lang: Language = ENGLISH) -> list[tuple[MatrixGroup, ...]]:
    """The matrix's groups cut into pages of group slices, in order (a slice that does not
    start its group is ``continued``). The first page also holds the matrix's heading,
    introduction and legend."""
    width_pt, height_pt = PAGE_PT.get(paper, PAGE_PT["a4"])
    intro_lines = lines_needed(Words(lang)["matrix_intro"], width_pt, INTRO_PT)
    room_per_page = height_pt - PAGE_SLACK_PT
    room = room_per_page - OPENING_PT - intro_lines * INTRO_PT * LINE_HEIGHT - INTRO_GAP_PT
    pages: list[tuple[MatrixGroup, ...]] = []
    page: list[MatrixGroup] = []
    for group in groups:
        rows: list[MatrixRow] = []
        first_row = 0
        table_pt = GROUP_HEADING_PT + HEAD_PT + TABLE_GAP_PT
        for index, row in enumerate(group.rows):
            height = row_pt(row)
            if not rows and page and table_pt + height > room:
                pages.append(tuple(page))  # not even the heading and one row fit: next page
                page, room = [], room_per_page
            if rows and height > room:
                page.append(replace(group, rows=tuple(rows), continued=first_row > 0))
                pages.append(tuple(page))
                page, room, rows, first_row = [], room_per_page, [], index
            if not rows:
                room -= table_pt
            rows.append(row)
            room -= height
        page.append(replace(group, rows=tuple(rows), continued=first_row > 0))
    pages.append(tuple(page))
    return pages


def matrix_runs(pages: Sequence[tuple[MatrixGroup, ...]],
                pages_per_part: int | None = None) -> list[tuple[MatrixGroup, ...]]:
    """The planned pages cut into runs of ``pages_per_part`` pages (default
    :data:`reportgen.report.page_plan.PAGES_PER_PART`), one PDF part each: the group
    slices of the run, each page after the run's first starting a new page."""
    size = pages_per_part or page_plan.PAGES_PER_PART
    runs = []
    for start in range(0, max(len(pages), 1), size):
        run = pages[start:start + size]
        runs.append(tuple(replace(group, page_start=number > 0 and index == 0)
                          for number, page in enumerate(run) for index, group in enumerate(page)))
    return runs
