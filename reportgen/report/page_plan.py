"""Pages planned before they are rendered: the geometry the planners share.

A rebuild renders again only the PDF parts whose HTML changed (reportgen.pdf.cache), and
a changed result changes one row of the long tables of the report: the link register
(the link's worst margin, its verdict) and the applications matrix (what the link would
carry). So those tables are cut into small parts, and each part ends a page: rendered on
its own, a part would end with a page only partly filled, a gap in the middle of the
table. The planners (:mod:`reportgen.report.register_pages`,
:mod:`reportgen.report.matrix_pages`) gather the rows into pages from their text: the
height of each row from the widths of its words in DejaVu Sans
(:mod:`reportgen.report.text_width`) wrapped in its column, and each page printed to
start a new page. A plan is a function of the report's content alone, so a full build
and a rebuild cut the tables in the same places (byte-identical builds).

The numbers restate what report.css and print.css set (page margins, font sizes, line
height, cell padding, column widths); ``tests/test_register_pages.py`` and
``tests/test_matrix_pages.py`` render planned pages and check each fits its page. An
estimate that is off only shows as a page less full than it could be or, far off, a
planned page that takes two; the slack below keeps that from happening.
"""
from __future__ import annotations

from typing import Final

from reportgen.report.text_width import text_width

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
# Slack: words measured 6 % wider than their advance widths say (no kerning, the serif
# heading measured in the sans face), and a page filled to its height less this much.
WIDTH_SLACK: Final = 1.06
PAGE_SLACK_PT: Final = 14.0
# Planned pages per PDF part: a rebuild renders the part holding a changed row again
# (about 45 register rows a page on A4).
PAGES_PER_PART: Final = 2



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
