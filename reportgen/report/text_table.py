"""A table set as lines of monospaced text: columns padded with spaces. Pure.

Why: the PDF renderer lays out and draws every table cell as boxes of its own (about 0.4 ms
a cell), while a line of text is one box. A table of many short rows, such as the OTDR event
table of a link sheet (templates/partials/link_otdr.html.j2), costs about a tenth as much to
render when each row is one line of a monospaced face, the columns aligned by spaces.

The table is read line by line, so it also reads in order aloud: the header lines first (each
label on one line: put a label's second part, such as its unit, on a header line of its own),
then one line per row. Only the last column may wrap: its text is folded at word boundaries
into continuation lines that start under the column, so a folded row still reads in order.
"""
from __future__ import annotations

import textwrap
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Final

LEFT: Final = "l"
RIGHT: Final = "r"
MIN_LAST: Final = 12  # the last column is never narrower than this many characters


@dataclass(frozen=True)
class TextTable:
    """A table as text lines, each exactly :attr:`width` characters wide (spaces padded)."""

    head: tuple[str, ...]  # the header lines
    rows: tuple[tuple[str, ...], ...]  # per row: its first line and its continuation lines
    width: int

    @property
    def lines(self) -> tuple[str, ...]:
        """Every line, header first."""
        return self.head + tuple(line for row in self.rows for line in row)


def column_widths(head: Sequence[Sequence[str]], rows: Sequence[Sequence[str]]) -> list[int]:
    """The width of each column: its longest cell or header label (in characters)."""
    count = len(head[0]) if head else len(rows[0])
    return [max((len(line[i]) for line in (*head, *rows)), default=0) for i in range(count)]


def text_table(head: Sequence[Sequence[str]], rows: Sequence[Sequence[str]], align: str,
               width: int, gap: int = 2) -> TextTable:
    """``head`` (header lines, one label per column each) and ``rows`` (one text per column)
    as lines of at most ``width`` characters (more only when the columns but the last do not
    leave :data:`MIN_LAST` characters for it: then the gaps shrink to one space first).

    ``align`` holds one :data:`LEFT` or :data:`RIGHT` per column; the last column is left
    aligned and takes the rest of the width, its text folded at spaces into continuation
    lines (a header label of the last column too, onto the following header lines or, at the
    end, new ones). Every line is padded with spaces to the table's width.
    """
    columns = len(align)
    if any(len(line) != columns for line in (*head, *rows)):
        raise ValueError(f"every header line and row needs {columns} cells")
    if align[-1] != LEFT:
        raise ValueError("the last column folds, so it is left aligned")
    widths = column_widths(head, rows)
    fixed = sum(widths[:-1])
    if fixed + gap * (columns - 1) + MIN_LAST > width:
        gap = 1
    last = max(MIN_LAST, width - fixed - gap * (columns - 1))
    last = min(last, max(widths[-1], MIN_LAST))  # no wider than its longest text needs
    total = fixed + gap * (columns - 1) + last
    start = total - last  # where the last column starts
    widths = [*widths[:-1], last]

    def fold(text: str) -> list[str]:
        return textwrap.wrap(text, last, break_on_hyphens=False) or [""]

    def line(cells: Sequence[str]) -> str:
        out = (" " * gap).join(cell.rjust(w) if a == RIGHT else cell.ljust(w)
                               for cell, w, a in zip(cells, widths, align))
        return out.ljust(total)

    # the last column's labels folded downwards through the header lines
    labels = [part for cells in head for part in fold(cells[-1]) if part]
    head_lines = [list(cells[:-1]) for cells in head]
    while len(head_lines) < len(labels):
        head_lines.append([""] * (columns - 1))
    labels += [""] * (len(head_lines) - len(labels))
    out_head = tuple(line([*cells, label]) for cells, label in zip(head_lines, labels))
    out_rows = []
    for cells in rows:
        parts = fold(cells[-1])
        out_rows.append((line([*cells[:-1], parts[0]]),
                         *((" " * start + part).ljust(total) for part in parts[1:])))
    return TextTable(out_head, tuple(out_rows), total)
