"""The link register's pages, planned before it is rendered (see
:mod:`reportgen.report.page_plan`): one table per page, a few pages to a PDF part.
"""
from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import Final

from reportgen.report import formats
from reportgen.report.i18n import ENGLISH, Language
from reportgen.report.messages import Words
from reportgen.report import page_plan
from reportgen.report.page_plan import (
    CELL_PAD_X_PT, CELL_PAD_Y_PT, ENDS_PT, HEAD_PAD_Y_PT, HEADING_PT, HEADING_SIZE_PT,
    INTRO_GAP_PT, INTRO_PT, LINE_HEIGHT, PAGE_PT, PAGE_SLACK_PT, ROW_RULE_PT, TABLE_GAP_PT,
    TABLE_PT, WIDTH_SLACK, lines_needed,
)
from reportgen.report.text_width import text_width
from reportgen.report.link_views import LinkView

# report.css register columns (col.c-id ... col.c-page), as shares of the table's width
COLUMNS: Final = (0.19, 0.33, 0.07, 0.08, 0.07, 0.10, 0.11, 0.05)


@dataclass(frozen=True)
class RegisterRows:
    """The rows of the link register one document shows (the template's ``register_rows``):
    all of them, or one run of a register cut into PDF parts, ``pages`` the rows of each
    planned page (one table each); ``first`` carries the heading, ``last`` is followed
    by the applications of a small project."""

    links: tuple[LinkView, ...]
    first: bool = True
    last: bool = True
    pages: tuple[tuple[LinkView, ...], ...] = ()

    def __post_init__(self) -> None:
        if not self.pages:
            object.__setattr__(self, "pages", (self.links,))


class RegisterPlanner:
    """Plans the register's pages for one paper size and language."""

    def __init__(self, paper: str, length_unit: str = "m", lang: Language = ENGLISH) -> None:
        self.width_pt, self.height_pt = PAGE_PT.get(paper, PAGE_PT["a4"])
        self.length_unit = length_unit
        self.lang = lang
        self.words = Words(lang)
        self.inner = [share * self.width_pt - CELL_PAD_X_PT for share in COLUMNS]

    def head_pt(self) -> float:
        """Height of the table's column headings."""
        t = self.words
        headings = (t["col_link"], t["col_ends"], t["col_fiber"], t["col_length"],
                    t["col_strands"], t["col_worst"], t["col_verdict"], t["col_page"])
        lines = max(lines_needed(text, inner, TABLE_PT, bold=True)
                    for text, inner in zip(headings, self.inner))
        return lines * TABLE_PT * LINE_HEIGHT + HEAD_PAD_Y_PT

    def heading_pt(self, intro: str) -> float:
        """Height of the register's heading and introduction (its first page)."""
        heading_lines = lines_needed(self.words["register_heading"], self.width_pt,
                                     HEADING_SIZE_PT, bold=True)
        intro_lines = lines_needed(intro, self.width_pt, INTRO_PT)
        return (HEADING_PT + (heading_lines - 1) * HEADING_SIZE_PT * LINE_HEIGHT
                + intro_lines * INTRO_PT * LINE_HEIGHT + INTRO_GAP_PT)

    def row_pt(self, link: LinkView) -> float:
        """Height of the link's row."""
        t, lang = self.words, self.lang
        cells = (
            (link.link_id, TABLE_PT, True, True),
            (f"{link.end_a} \u2192 {link.end_b}", ENDS_PT, False, True),
            (link.fiber_type, TABLE_PT, False, True),
            (formats.format_length(link.length_m, self.length_unit, lang), TABLE_PT, False, False),
            (str(link.strands), TABLE_PT, False, True),
            (formats.format_db(link.worst_margin_db, lang), TABLE_PT, False, False),
        )
        lines = max(lines_needed(text, inner, size, bold, wrap) * size * LINE_HEIGHT
                    for (text, size, bold, wrap), inner in zip(cells, self.inner))
        if link.errors:  # the verdict word never wraps (it may overflow); the mark after it may
            verdict = f"{t['mark_' + link.verdict]}\u200a{t['verdict_' + link.verdict]}"
            shown = WIDTH_SLACK * text_width(f"{verdict} {t['mark_sev_error']}", TABLE_PT, True)
            if shown > self.inner[6]:
                lines = max(lines, 2 * TABLE_PT * LINE_HEIGHT)
        return lines + CELL_PAD_Y_PT + ROW_RULE_PT

    def pages(self, links: Sequence[LinkView], intro: str) -> list[tuple[LinkView, ...]]:
        """The register's rows gathered into pages, in order (at least one page)."""
        room_per_page = self.height_pt - self.head_pt() - TABLE_GAP_PT - PAGE_SLACK_PT
        pages: list[tuple[LinkView, ...]] = []
        current: list[LinkView] = []
        room = room_per_page - self.heading_pt(intro)
        for link in links:
            height = self.row_pt(link)
            if current and height > room:
                pages.append(tuple(current))
                current, room = [], room_per_page
            current.append(link)
            room -= height
        pages.append(tuple(current))
        return pages


def register_runs(pages: Sequence[tuple[LinkView, ...]],
                  pages_per_part: int | None = None) -> list[RegisterRows]:
    """The planned pages cut into runs of ``pages_per_part`` pages (default
    :data:`reportgen.report.page_plan.PAGES_PER_PART`; one PDF part each)."""
    pages_per_part = pages_per_part or page_plan.PAGES_PER_PART
    runs = [tuple(pages[start:start + pages_per_part])
            for start in range(0, max(len(pages), 1), pages_per_part)]
    return [RegisterRows(tuple(link for page in run for link in page), first=index == 0,
                         last=index == len(runs) - 1, pages=run)
            for index, run in enumerate(runs)]
