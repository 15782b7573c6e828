"""Reading the CSV tables of a project folder into columns of trimmed text.

Contract (project format v1, "All CSV files"): UTF-8 with or without a byte-order
mark, comma separated, a header row, column names case-insensitive, surrounding
blanks ignored, unknown columns kept and ignored, an empty cell means "not given".
Values are left as text here; ``reportgen.inputs.project`` checks and converts them.
"""
from __future__ import annotations

import csv
import difflib
import io
from collections.abc import Sequence
from dataclasses import dataclass
from operator import itemgetter
from pathlib import Path

from reportgen.errors import InputProblem
from reportgen.inputs.checker import DECIMAL_COMMA_TEXT
from reportgen.inputs.files import clip, read_text

_SEPARATORS = {";": "semicolon", "\t": "tab"}


@dataclass(frozen=True)
class CsvTable:
    """The rows of one CSV file, by column; blank rows are skipped."""

    file: str  # relative to the project folder
    columns: dict[str, list[str]]  # known column (lower case) -> trimmed cells, "" = not given
    lines: list[int]  # line where each row starts (header = line 1)
    # rows too long to say which cell is which: reported once; their cells are not checked
    unreadable: frozenset[int] = frozenset()  # by line

    def __len__(self) -> int:
        return len(self.lines)

    def has(self, name: str) -> bool:
        return name in self.columns


def _separator_problem(text: str, shown: str) -> InputProblem | None:
    """A problem when the header is split by semicolons or tabs rather than commas."""
    header_line = text.split("\n", 1)[0]
    commas = header_line.count(",")
    for separator, name in _SEPARATORS.items():
        if header_line.count(separator) > commas:
            decimal = " with decimal commas" if DECIMAL_COMMA_TEXT.search(text, 0, 100_000) else ""
            return InputProblem(
                shown, 1, None,
                "comma-separated values with a decimal point in numbers "
                f"(file looks {name}-separated{decimal}; export it again as comma-separated CSV)")
    return None


def _header_problems(names: list[str], shown: str, required: Sequence[tuple[str, ...]],
                     known: set[str]) -> list[InputProblem]:
    problems = []
    first_column: dict[str, int] = {}
    for index, name in enumerate(names, start=1):
        if not name:
            continue
        if name in first_column:
            problems.append(InputProblem(
                shown, 1, clip(name),
                f"each column name once (found in columns {first_column[name]} and {index})"))
        first_column.setdefault(name, index)
    unknown = [name for name in first_column if name not in known]
    for group in required:
        if any(name in first_column for name in group):
            continue
        wanted = group[0] if len(group) == 1 else ", ".join(group[:-1]) + f" or {group[-1]}"
        hint = ""
        for name in group:
            close = difflib.get_close_matches(name, unknown, n=1, cutoff=0.75)
            if close:
                hint = f" (did you mean {name} instead of {close[0]!r}?)"
                break
        problems.append(InputProblem(shown, 1, group[0], f"a column named {wanted}{hint}"))
    return problems


def read_csv(path: Path, shown: str, *, required: Sequence[tuple[str, ...]],
             optional: Sequence[str], decimal: Sequence[str] = ()
             ) -> tuple[CsvTable | None, list[InputProblem]]:
    """Read one CSV file of the project folder.

    Parameters
    ----------
    path, shown : Path, str
        The file, and its name as problems show it (relative, forward slashes).
    required : sequence of tuple of str
        Required columns; a tuple of several names means "one of these".
    optional : sequence of str
        Other columns the caller reads; all further columns are ignored.
    decimal : sequence of str
        Columns holding decimal numbers: a row one cell too long because such a
        number was written with an unquoted decimal comma (``0,87``) gets one
        problem naming that column, and is read as if ``0.87`` had been written.

    Returns
    -------
    (CsvTable or None, list of InputProblem)
        None when the file cannot be read as a table at all (size, encoding,
        separator, no header row, broken quoting). Header problems (a required
        column missing or named twice) and row problems (too many cells) come
        with a table of the columns that were recognised; a missing column is
        absent from ``CsvTable.columns``.
    """
    text, problems = read_text(path, shown)
    if text is None:
        return None, problems
    if not text.strip():
        return None, [InputProblem(shown, None, None, "a header row naming the columns (file is empty)")]
    separator = _separator_problem(text, shown)
    if separator is not None:
        return None, [separator]

    reader = csv.reader(io.StringIO(text, newline=""))
    try:
        header = next(reader, None)
        while header is not None and not "".join(header).strip():  # leading blank lines
            header = next(reader, None)
    except csv.Error as error:
        return None, [InputProblem(shown, reader.line_num, None, "well-formed CSV", clip(str(error)))]
    if header is None:
        return None, [InputProblem(shown, None, None,
                                   "a header row naming the columns (the file has only empty cells)")]
    names = [name.strip().lower() for name in header]
    known = {name for group in required for name in group} | set(optional)
    # A header problem (a required column missing or named twice) does not stop the rows from
    # being read: the columns that were recognised are still checked in the same run.
    problems = _header_problems(names, shown, required, known)

    width = len(names)
    first_line = reader.line_num + 1
    try:
        records = list(reader)
    except csv.Error as error:
        return None, problems + [InputProblem(shown, reader.line_num, None, "well-formed CSV", clip(str(error)))]
    if reader.line_num == first_line - 1 + len(records):
        starts = range(first_line, first_line + len(records))  # one line per record: the usual case
    else:
        starts = _record_starts(text, first_line - 1)
    if records and any("\n" in cell or "\r" in cell for cell in records[-1]) and text.count('"') % 2:
        # The csv module reads a quote that is never closed as a cell running to the end of the
        # file, silently swallowing every row after it: refuse the file instead.
        return None, problems + [InputProblem(
            shown, list(starts)[-1], None,
            'a closing quote " for the cell opened on this line (otherwise every line after it '
            "would be read as part of that cell)")]
    sizes = list(map(len, records))
    if sizes.count(width) == len(sizes):  # the usual case: every row as wide as the header
        rows, lines, unreadable = records, list(starts), []
    else:
        rows, lines = [], []
        unreadable: list[int] = []
        for row, start, size in zip(records, starts, sizes):
            if size < width:
                row = row + [""] * (width - size)
            elif size > width:
                while len(row) > width and not row[-1].strip():  # trailing empty cells are harmless
                    row = row[:-1]
                size = len(row)
                split = _decimal_comma_split(row, names, set(decimal), size - width) if size > width else None
                if split is not None:
                    row, merged = split
                    problems += [InputProblem(
                        shown, start, column,
                        f"a number with a decimal point (the unquoted comma in {written} splits the row "
                        f"into {size} cells for {width} columns; write {written.replace(',', '.')})",
                        written) for column, written in merged]
                elif size > width:  # which cell was split is unknown: the row gets this one problem only
                    problems.append(InputProblem(
                        shown, start, None,
                        f"at most {width} cells, one per header column (write numbers with a decimal "
                        "point, 1.25 not 1,25, and put a text that contains a comma in double quotes)",
                        f"{size} cells"))
                    unreadable.append(len(rows))
                    row = row[:width]
            rows.append(row)
            lines.append(start)
    blank = [not joined.strip() for joined in map("".join, rows)]
    unreadable_lines = frozenset(lines[index] for index in unreadable)
    if any(blank):
        rows = [row for row, is_blank in zip(rows, blank) if not is_blank]
        lines = [line for line, is_blank in zip(lines, blank) if not is_blank]

    wanted = {name: names.index(name) for name in known if name in names}
    columns = {name: list(map(str.strip, map(itemgetter(index), rows))) for name, index in wanted.items()}
    return CsvTable(shown, columns, lines, unreadable_lines), problems


def _decimal_comma_split(row: list[str], names: list[str], decimal: set[str], extra: int
                         ) -> tuple[list[str], list[tuple[str, str]]] | None:
    """The row as meant when its ``extra`` surplus cells come from numbers in ``decimal`` columns
    written with an unquoted decimal comma: (cells with ``0.87`` for ``0,87``, [(column, written)]).
    None unless exactly one such reading exists."""
    readings: list[tuple[list[str], list[tuple[str, str]]]] = []

    def search(cells: list[str], start: int, left: int, merged: list[tuple[str, str]]) -> None:
        if left == 0:
            readings.append((cells, merged))
            return
        # cells before ``start`` are in their final columns: merging left to right keeps them there
        for index in range(start, min(len(names), len(cells) - 1)):
            if len(readings) > 1:
                return
            if names[index] not in decimal:
                continue
            written = f"{cells[index].strip()},{cells[index + 1].strip()}"
            if DECIMAL_COMMA_TEXT.fullmatch(written):
                search(cells[:index] + [written.replace(",", ".")] + cells[index + 2:], index + 1,
                       left - 1, merged + [(names[index], written)])

    if extra <= len(decimal):
        search(list(row), 0, extra, [])
    return readings[0] if len(readings) == 1 else None


def _record_starts(text: str, header_end: int) -> list[int]:
    """Start line of every record after line ``header_end``, for files with line breaks in cells."""
    reader = csv.reader(io.StringIO(text, newline=""))
    starts = []
    previous = 0
    for _ in reader:
        if previous >= header_end:
            starts.append(previous + 1)
        previous = reader.line_num
    return starts
