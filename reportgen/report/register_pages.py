"""The link register's pages, planned before it is rendered.

A rebuild renders again only the PDF parts whose HTML changed (reportgen.pdf.cache), and
nearly every changed result changes one row of the register (the link's worst margin or
verdict). So the register is cut into small parts, and a part ends a page: rendered on
its own, it would end with a page only partly filled, a gap in the middle of the table.
This module plans the register's pages from its rows' text: the height of each row
from the widths of its words in DejaVu Sans (:mod:`reportgen.report.text_width`) wrapped
in its column, rows gathered into pages that hold them with room to spare, and each
page printed as a table of its own that starts a new page. The plan is a function of
the report's content alone, so a full build and a rebuild cut the register in the same
places (byte-identical builds).

The numbers below restate what report.css and print.css set for the register (page
margins, the table's font sizes, line height, cell padding, column widths); the test
``tests/test_register_pages.py`` renders planned pages and checks each fits its page.
An estimate that is off only shows as a page less full than it could be, or, far off,
a planned page that takes two; the slack below keeps that from happening.
"""
from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import Final

from reportgen.report import formats
from reportgen.report.i18n import ENGLISH, Language
from reportgen.report.messages import Words
from reportgen.report.text_width import text_width
from reportgen.report.viewmodel import LinkView

PT_PER_MM: Final = 72 / 25.4
# Content box of a page (print.css @page margins 14/15/18/15 mm), in points.
PAGE_PT: Final = {"a4": ((210 - 30) * PT_PER_MM, (297 - 32) * PT_PER_MM),
                  "letter": ((215.9 - 30) * PT_PER_MM, (279.4 - 32) * PT_PER_MM)}
LINE_HEIGHT: Final = 1.35            # report.css html
TABLE_PT: Final = 7.8                # table.grid font-size
ENDS_PT: Final = 7.5                 # td.ends
INTRO_PT: Final = 7.5                # .small
CELL_PAD_X_PT: Final = 2 * 1.0 * PT_PER_MM     # .grid td: 1 mm each side
CELL_PAD_Y_PT: Final = 2 * 0.8 * PT_PER_MM     # .grid td: 0.8 mm above and below
ROW_RULE_PT: Final = 0.4
HEAD_PAD_Y_PT: Final = (1.2 + 0.8) * PT_PER_MM + 0.8  # .grid th padding and rule
# h1 (15 pt DejaVu Serif, padding 1.5 mm, rule, margin 3 mm) and the intro's margin
HEADING_PT: Final = 15 * LINE_HEIGHT + (1.5 + 3) * PT_PER_MM + 0.6
HEADING_SIZE_PT: Final = 15
INTRO_GAP_PT: Final = 1.5 * PT_PER_MM
TABLE_GAP_PT: Final = 2 * PT_PER_MM  # table.grid margin-bottom
# report.css register columns (col.c-id ... col.c-page), as shares of the table's width
COLUMNS: Final = (0.19, 0.33, 0.07, 0.08, 0.07, 0.10, 0.11, 0.05)
# Slack: words measured 3 % wider than their advance widths say (no kerning, the serif
# heading measured in the sans face), and a page filled to its height less this much.
WIDTH_SLACK: Final = 1.06
PAGE_SLACK_PT: Final = 14.0
# Planned pages per PDF part of the register: a rebuild renders the part holding a
# changed row again (about 45 rows a page on A4).
PAGES_PER_PART: Final = 2


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


def lines_needed(text: str, width_pt: float, size_pt: float, bold: bool = False,
                 wrap: bool = True) -> int:
    """Lines ``text`` takes in a box ``width_pt`` wide: broken at spaces, a word wider
    than the box broken anywhere (``overflow-wrap: anywhere``); one when it may not wrap."""
    if not wrap or not text:
        return 1

    def width(part: str) -> float:
        return WIDTH_SLACK * text_width(part, size_pt, bold)

    lines, line = 1, ""
    for word in text.split(" "):
        candidate = f"{line} {word}" if line else word
        if width(candidate) <= width_pt:
            line = candidate
            continue
        if line:
            lines += 1
        line = ""
        for char in word:  # a word longer than the box: broken where it reaches the edge
            if line and width(line + char) > width_pt:
                lines += 1
                line = ""
            line += char
    return lines


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
    :data:`PAGES_PER_PART`; one PDF part each)."""
    pages_per_part = pages_per_part or PAGES_PER_PART
    runs = [tuple(pages[start:start + pages_per_part])
            for start in range(0, max(len(pages), 1), pages_per_part)]
    return [RegisterRows(tuple(link for page in run for link in page), first=index == 0,
                         last=index == len(runs) - 1, pages=run)
            for index, run in enumerate(runs)]
