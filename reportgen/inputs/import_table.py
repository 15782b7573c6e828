"""Turning a grid of imported cells into a table of our field names (``ImportedTable``).

The profile maps headers to fields (or a wide layout's columns to one field per row), converts
decimal commas, dates and split date/time cells, and fills constants. The rows are then checked
by the same functions as native rows (``check_results``; ``check_links`` of
:mod:`reportgen.inputs.links`; called by ``reportgen.inputs.project``); ``ImportedTable.remap``
rewrites their problems to name the original file, row (and sheet) and header.
"""
from __future__ import annotations

import dataclasses
import difflib
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from datetime import datetime, time
from typing import Any, Final

import numpy as np

from reportgen.errors import InputProblem
from reportgen.inputs.checker import DECIMAL_HINT
from reportgen.inputs.csvread import CsvTable
from reportgen.inputs.files import clip
from reportgen.inputs.import_grid import Grid, cell_text
from reportgen.inputs.imports import SPLIT_DATE, Columns, Entry, Profile
from reportgen.model import ImportSource

# Fields holding numbers: with ``decimal: ","`` their comma is read as the decimal point.
NUMBER_FIELDS: Final = frozenset({"strand", "wavelength_nm", "loss_db", "length", "length_m",
                                  "length_ft", "strands", "connections", "splices"})
TIME_FORMATS: Final = ("%H:%M:%S", "%H:%M")


@dataclass
class ImportedTable:
    """A grid turned into our fields: the table the usual checks read, and how to name a cell."""

    table: CsvTable  # lines are positions 1..n (results) or the original numbers (links)
    source: ImportSource
    sheet: str | None
    numbers: np.ndarray  # original line/row number of each table row
    labels: dict[str, str]  # our field -> how a message names it
    wide_labels: list[str]  # label of the wide field per table row (wide layouts only)
    wide_field: str | None
    problems: list[InputProblem] = field(default_factory=list)  # from mapping values and dates
    settled: set[tuple[int, str]] = field(default_factory=set)  # (number, field) already reported

    def remap(self, problems: Sequence[InputProblem], *, positions: bool) -> list[InputProblem]:
        """The usual checks' problems naming the original row and header, with the mapping's own
        problems, in row order; one problem per original cell."""
        out = list(self.problems)
        for problem in problems:
            number = problem.line
            if positions and number is not None:
                number = int(self.numbers[number - 1])
            names = (problem.field or "").split("/")
            if any((number, name) in self.settled for name in names):
                continue
            labels = [self.wide_labels[problem.line - 1] if name == self.wide_field and positions
                      and problem.line else self.labels.get(name, name) for name in names]
            expected = problem.expected.replace(
                DECIMAL_HINT, f' (for decimal commas write decimal: "," in {self.source.profile})')
            out.append(dataclasses.replace(problem, line=number, field=" / ".join(labels) or None,
                                           expected=expected, sheet=self.sheet))
        unique = list(dict.fromkeys(out))
        return sorted(unique, key=lambda problem: problem.line or 0)


def _label(header: str, name: str) -> str:
    return f'"{clip(header)}" ({name})'


def build_table(grid: Grid, entry: Entry, kind_columns: Columns) -> tuple[ImportedTable | None, list[InputProblem]]:
    """Map a grid's columns to our fields; header problems (a mapped header that is not there)
    come back alone, with the closest headers present."""
    profile = entry.profile
    index: dict[str, int] = {}
    twice: dict[str, list[int]] = {}
    for position, name in enumerate(grid.header):
        if name:
            index.setdefault(name, position)
            twice.setdefault(name, []).append(position + 1)
    problems: list[InputProblem] = []
    wanted = {header for headers in profile.columns.values() for header in headers}
    wanted |= {header for header, _ in profile.wide}
    for name in sorted(wanted & {name for name, at in twice.items() if len(at) > 1}):
        problems.append(InputProblem(
            grid.file, grid.header_number, f'"{clip(name)}"',
            "a header the profile reads to appear once (found in columns "
            + ", ".join(map(str, twice[name])) + f"; {profile.path} cannot tell which is meant)",
            sheet=grid.sheet))

    def missing(headers: Sequence[str], name: str, key: str) -> None:
        present = [header for header in index]
        close = []
        for header in headers:
            close += difflib.get_close_matches(header, present, n=3, cutoff=0.5)
            close += [other for other in present if other.casefold() == header.casefold()]
        close = list(dict.fromkeys(close))[:3]
        hint = ("; closest headers present: " + ", ".join(f'"{clip(text)}"' for text in close)) if close \
            else "; headers present: " + ", ".join(f'"{clip(text)}"' for text in present[:12])
        looked = " or ".join(f'"{clip(header)}"' for header in headers)
        problems.append(InputProblem(grid.file, grid.header_number, name,
                                     f"a column headed {looked} ({key} in {profile.path}){hint}",
                                     sheet=grid.sheet))

    used: dict[str, tuple[str, int]] = {}
    for name, headers in profile.columns.items():
        found = next((header for header in headers if header in index), None)
        if found is None:
            missing(headers, name, f"columns.{name}")
        else:
            used[name] = (found, index[found])
    wide_columns: list[tuple[str, int, Mapping[str, str]]] = []
    for header, fixed in profile.wide:
        if header not in index:
            missing((header,), profile.wide_field or "", f"wide.{profile.wide_field}")
        else:
            wide_columns.append((header, index[header], fixed))
    if problems:
        return None, problems

    rows = grid.rows
    numbers = np.asarray(grid.numbers, dtype=np.int64)

    def column(position: int) -> list[str]:
        return [cell_text(row[position]) if position < len(row) else "" for row in rows]

    def written_as_text(position: int) -> list[bool]:
        """Per row, whether the cell holds text (every cell of a text file; a spreadsheet's
        number cells are numbers as stored, whatever the decimal sign)."""
        return [position < len(row) and type(row[position]) is str for row in rows]

    texts: dict[str, list[str]] = {name: column(position) for name, (_, position) in used.items()}
    labels = {name: _label(header, name) for name, (header, _) in used.items()}
    mapping_problems: list[InputProblem] = []
    settled: set[tuple[int, str]] = set()

    def bad(row: int, name: str, label_name: str, expected: str, found: str) -> None:
        mapping_problems.append(InputProblem(grid.file, int(numbers[row]), labels.get(label_name, label_name),
                                             expected, clip(found), sheet=grid.sheet))
        settled.add((int(numbers[row]), name))

    # their spellings -> ours
    for name, table in profile.values.items():
        cells = texts[name]
        listed = ", ".join(profile.spellings[name])
        for row, text in enumerate(cells):
            if text:
                ours = table.get(text.casefold())
                if ours is None:
                    bad(row, name, name, f"one of the spellings under values.{name} in {profile.path}: {listed}",
                        text)
                    cells[row] = ""
                else:
                    cells[row] = ours

    # decimal commas; a point is refused, not guessed
    point_expected = _point_expected(profile)
    if profile.decimal == ",":
        for name in sorted(NUMBER_FIELDS & set(texts)):
            written, points = _decimal_commas(texts[name], written_as_text(used[name][1]))
            for row in points:
                bad(row, name, name, point_expected, texts[name][row])
            texts[name] = written

    # dates and times
    formats = profile.date_formats
    if "tested_date" in texts:
        dates = texts.pop("tested_date")
        times = texts.pop("tested_time", None)
        date_header = used["tested_date"][0]
        labels["tested_at"] = (_label(date_header, "tested_date") if times is None else
                               f'"{clip(date_header)}" + "{clip(used["tested_time"][0])}" (tested_at)')
        combined = []
        parse_date = _memo(lambda text: _parse_moment(text, formats, dates_only=True))
        parse_time = _memo(_parse_time)
        for row, text in enumerate(dates):
            moment = parse_date(text) if text else ""
            if moment is None:
                bad(row, "tested_at", "tested_date", _date_expected(formats, profile), text)
                moment = ""
            clock = times[row] if times is not None else ""
            if clock:
                parsed = parse_time(clock)
                if parsed is None:
                    mapping_problems.append(InputProblem(
                        grid.file, int(numbers[row]), _label(used["tested_time"][0], "tested_time"),
                        "a time written as HH:MM or HH:MM:SS", clip(clock), sheet=grid.sheet))
                    settled.add((int(numbers[row]), "tested_at"))
                elif moment:
                    moment = f"{moment}T{parsed}"
            combined.append(moment)
        texts["tested_at"] = combined
    elif "tested_at" in texts and formats:
        parse = _memo(lambda text: _parse_moment(text, formats, dates_only=False))
        cells = texts["tested_at"]
        for row, text in enumerate(cells):
            if text:
                moment = parse(text)
                if moment is None:
                    bad(row, "tested_at", "tested_at", _date_expected(formats, profile), text)
                    cells[row] = ""
                else:
                    cells[row] = moment

    n = len(rows)
    take = np.arange(n)
    wide_labels: list[str] = []
    if wide_columns:
        wide_texts = [column(position) for _, position, _ in wide_columns]
        if profile.decimal == "," and profile.wide_field in NUMBER_FIELDS:
            for at, (header, position, _) in enumerate(wide_columns):
                written, points = _decimal_commas(wide_texts[at], written_as_text(position))
                for row in points:  # the cell gives no result; other cells of the row still do
                    mapping_problems.append(InputProblem(
                        grid.file, int(numbers[row]), _label(header, profile.wide_field), point_expected,
                        clip(wide_texts[at][row]), sheet=grid.sheet))
                wide_texts[at] = written
        filled = np.array([[text != "" for text in cells] for cells in wide_texts], dtype=bool).reshape(
            len(wide_columns), n)
        rows_at, columns_at = np.nonzero(filled.T)  # row by row, columns in profile order
        take = rows_at
        texts = {name: [cells[row] for row in take] for name, cells in texts.items()}
        texts[profile.wide_field] = [wide_texts[col][row] for row, col in zip(rows_at, columns_at)]
        for fixed_name in wide_columns[0][2]:
            texts[fixed_name] = [wide_columns[col][2][fixed_name] for col in columns_at]
            labels[fixed_name] = f"wide.{profile.wide_field} in {profile.path} ({fixed_name})"
        wide_labels = [_label(wide_columns[col][0], profile.wide_field) for col in columns_at]
    count = len(take)
    for name, value in profile.constants.items():
        texts[name] = [value] * count
        labels[name] = f"constants.{name} in {profile.path} ({name})"

    table_numbers = numbers[take]
    lines = list(range(1, count + 1)) if profile.kind == "results" else table_numbers.tolist()
    table = CsvTable(grid.file, texts, lines)

    mapping = [(name, used[name][0]) for name in kind_columns.fields + SPLIT_DATE if name in used]
    if profile.wide_field:
        mapping.append((profile.wide_field, "wide: " + ", ".join(header for header, _, _ in wide_columns)))
    mapping += [(name, f"constant: {value}") for name, value in profile.constants.items()]
    taken = {position for _, position in used.values()} | {position for _, position, _ in wide_columns}
    unmapped = tuple(name for name, position in index.items() if position not in taken)
    source = ImportSource(entry=entry.number, profile=profile.path, kind=profile.kind, file=grid.file,
                          sheet=grid.sheet, rows_read=n, rows_made=count, mapping=tuple(mapping),
                          unmapped=unmapped)
    return ImportedTable(table, source, grid.sheet, table_numbers, labels, wide_labels,
                         profile.wide_field, mapping_problems, settled), []


def _decimal_commas(cells: list[str], as_text: list[bool]) -> tuple[list[str], list[int]]:
    """Numbers written with a decimal comma (``decimal: ","``) with a point instead, and the rows
    whose text holds a point (``1.5``, ``1.234,5``): in a decimal-comma file a point is a
    thousands separator or a slip, never read as the decimal sign; those cells come back empty.
    Cells not written as text (a spreadsheet's number cells) are numbers as stored, kept."""
    points = [row for row, (text, is_text) in enumerate(zip(cells, as_text)) if is_text and "." in text]
    written = [text.replace(",", ".") if is_text else text for text, is_text in zip(cells, as_text)]
    for row in points:
        written[row] = ""
    return written, points


def _point_expected(profile: Profile) -> str:
    return (f'a number with a decimal comma, e.g. 1,5, as decimal: "," in {profile.path} says (a point '
            "is not read: in such a file it is a thousands separator or a slip)")


def source_texts(file: str, sheet: str | None, numbers: np.ndarray) -> list[str]:
    """The ``source`` of each row: ``file:line``, for a spreadsheet ``file[sheet]:row``."""
    prefix = f"{file}[{sheet}]:" if sheet is not None else f"{file}:"
    return [prefix + str(number) for number in numbers.tolist()]


def _memo(function):
    cache: dict[str, Any] = {}

    def cached(text: str) -> Any:
        if text not in cache:
            cache[text] = function(text)
        return cache[text]

    return cached


def _date_expected(formats: Sequence[str], profile: Profile) -> str:
    written = " or ".join(formats) if formats else "ISO 8601 (2030-01-15)"
    return f"a date written as {written} (date_format in {profile.path})"


def _parse_moment(text: str, formats: Sequence[str], *, dates_only: bool) -> str | None:
    """ISO 8601 text of a date (or date-time) written in one of ``formats``; ISO 8601 itself (as a
    spreadsheet's date cell reads) is accepted too. None when nothing parses."""
    for written in formats:
        try:
            moment = datetime.strptime(text, written)
        except ValueError:
            continue
        if dates_only or not any(code in written for code in ("%H", "%I", "%M", "%S", "%X", "%c")):
            return moment.date().isoformat()
        return moment.isoformat(timespec="seconds")
    try:
        moment = datetime.fromisoformat(text)
    except ValueError:
        return None
    if dates_only:
        return moment.date().isoformat() if moment.time() == time(0) else None
    return text


def _parse_time(text: str) -> str | None:
    for written in TIME_FORMATS:
        try:
            return datetime.strptime(text, written).time().isoformat(timespec="seconds")
        except ValueError:
            continue
    return None
