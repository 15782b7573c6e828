"""Reading an imported file into a grid of cells: CSV/TXT text with the profile's delimiter,
encoding and skipped rows, or one sheet of an ``.xlsx``/``.ods`` spreadsheet (python-calamine: one
reader for .xlsx, .xlsm, .xls and .ods, returning numbers, dates and times as the file stores them
and formulas as their cached values). The grid keeps the original line or row numbers so every
problem can name them. The profiles that steer the reading are checked in
``reportgen.inputs.imports``; the grid becomes our fields in ``reportgen.inputs.import_table``.
"""
from __future__ import annotations

import csv
import difflib
import io
import zipfile
from dataclasses import dataclass
from datetime import date, datetime, time, timedelta
from collections.abc import Sequence
from pathlib import Path
from typing import Any, Final

from reportgen.errors import InputProblem
from reportgen.inputs.files import MAX_FILE_BYTES, clip, read_bytes, size_in_mb
from reportgen.inputs.imports import Profile

SPREADSHEET_SUFFIXES: Final = (".xlsx", ".xlsm", ".xls", ".ods")
TEXT_SUFFIXES: Final = (".csv", ".txt", ".tsv")
DETECTED_DELIMITERS: Final = (",", ";", "\t", "|")
# largest spreadsheet read, unpacked (a zip packs a sheet some 10-20 times): a guard against
# a small file that would unpack to gigabytes
MAX_UNPACKED_BYTES: Final = 4 * MAX_FILE_BYTES


@dataclass
class Grid:
    """The cells of one file: the header row and the data rows, with their line or row numbers."""

    file: str
    sheet: str | None
    header: list[str]
    header_number: int
    rows: list[list[Any]]
    numbers: list[int]


def cell_text(value: Any) -> str:
    """A cell as text: numbers as stored (850.0 -> "850"), dates and times in ISO 8601."""
    kind = type(value)
    if kind is str:
        return value.strip()
    if kind is float:
        return str(int(value)) if value.is_integer() and abs(value) < 1e15 else repr(value)
    if value is None:
        return ""
    if kind is bool:
        return "TRUE" if value else "FALSE"
    if isinstance(value, datetime):
        return value.isoformat(timespec="seconds") if value.time() != time(0) else value.date().isoformat()
    if isinstance(value, (date, time)):
        return value.isoformat()
    if isinstance(value, timedelta):  # a time of day stored as a duration
        seconds = round(value.total_seconds())
        return f"{seconds // 3600:02d}:{seconds % 3600 // 60:02d}:{seconds % 60:02d}"
    return str(value).strip()


def _joined_header(rows: Sequence[Sequence[str]]) -> list[str]:
    """The header text of each column from the header's rows (``header_rows``): in every row but
    the last, an empty cell takes the text on its left (a cell merged over several columns holds
    its text in the first of them and reads empty in the others), then each column's texts are
    joined top to bottom with one space, empty ones left out. A column empty in every header row
    stays without a header. ``Loss (dB)`` merged over two columns above ``850`` and ``1300`` gives
    ``Loss (dB) 850`` and ``Loss (dB) 1300``; ``Link`` merged over two rows gives ``Link``."""
    width = max(map(len, rows))
    grid = [[*row, *[""] * (width - len(row))] for row in rows]
    named = [any(row[column] for row in grid) for column in range(width)]
    for row in grid[:-1]:
        carried = ""
        for column in range(width):
            if row[column]:
                carried = row[column]
            elif named[column]:
                row[column] = carried
    return [" ".join(row[column] for row in grid if row[column]) for column in range(width)]


def read_grid(path: Path, shown: str, profile: Profile, sheet: str | None
              ) -> tuple[Grid | None, list[InputProblem]]:
    """The header and data rows of a text file or a spreadsheet (blank rows dropped)."""
    suffix = path.suffix.lower()
    if suffix in SPREADSHEET_SUFFIXES:
        return _sheet_grid(path, shown, profile, sheet)
    if suffix in TEXT_SUFFIXES:
        if sheet is not None:
            return None, [InputProblem(shown, None, None, "a spreadsheet (.xlsx, .ods) when sheet is given",
                                       suffix)]
        return _text_grid(path, shown, profile)
    return None, [InputProblem(shown, None, None,
                               "a file ending " + ", ".join((*TEXT_SUFFIXES, *SPREADSHEET_SUFFIXES)),
                               path.name)]


def _text_grid(path: Path, shown: str, profile: Profile) -> tuple[Grid | None, list[InputProblem]]:
    data, problems = read_bytes(path, shown)
    if data is None:
        return None, problems
    try:
        text = data.decode(profile.encoding)
    except UnicodeDecodeError as error:
        shown_encoding = "utf-8" if profile.encoding == "utf-8-sig" else profile.encoding
        line = data.count(b"\n", 0, error.start) + 1
        bad = data[error.start:error.start + 1].hex().upper()
        return None, [InputProblem(shown, line, None, f"text in {shown_encoding} (encoding in "
                                   f"{profile.path})", f"byte 0x{bad}")]
    offset = 0
    for _ in range(profile.skip_rows):
        offset = text.find("\n", offset) + 1
        if offset == 0:
            return None, [InputProblem(shown, None, None, f"a header row after the {profile.skip_rows} lines "
                                       f"skipped (skip_rows in {profile.path})", "the file ends before")]
    body = text[offset:]
    delimiter = profile.delimiter
    if delimiter is None:
        first = next((line for line in body.splitlines() if line.strip()), "")
        counts = [first.count(candidate) for candidate in DETECTED_DELIMITERS]
        delimiter = DETECTED_DELIMITERS[counts.index(max(counts))] if max(counts) else ","
    reader = csv.reader(io.StringIO(body, newline=""), delimiter=delimiter)
    rows: list[list[str]] = []
    numbers: list[int] = []
    header_rows: list[list[str]] = []
    header_number = 0
    previous = 0
    try:
        for record in reader:
            start = profile.skip_rows + previous + 1
            previous = reader.line_num
            blank = not "".join(record).strip()
            if len(header_rows) < profile.header_rows and (header_rows or not blank):
                # the header's first line is the first non-blank one; the lines right below it
                # complete it (header_rows)
                header_rows.append([cell.strip() for cell in record])
                header_number = header_number or start
                continue
            if blank:
                continue
            rows.append(record)
            numbers.append(start)
    except csv.Error as error:
        return None, [InputProblem(shown, profile.skip_rows + reader.line_num, None, "well-formed CSV",
                                   clip(str(error)))]
    if not header_rows:
        return None, [InputProblem(shown, None, None, "a header row naming the columns (the file has no "
                                   "non-empty line after the lines skipped)")]
    header = _joined_header(header_rows)
    if rows and any("\n" in cell or "\r" in cell for cell in rows[-1]) and body.count('"') % 2:
        # a quote never closed reads as one cell to the end of the file: refuse, as for native CSV
        return None, [InputProblem(shown, numbers[-1], None,
                                   'a closing quote " for the cell opened on this line (otherwise every '
                                   "line after it would be read as part of that cell)")]
    return Grid(shown, None, header, header_number, rows, numbers), []


def _sheet_grid(path: Path, shown: str, profile: Profile, sheet: str | None
                ) -> tuple[Grid | None, list[InputProblem]]:
    import python_calamine

    data, problems = read_bytes(path, shown)
    if data is None:
        return None, problems
    unpacked = _unpacked_size(data)
    if unpacked > MAX_UNPACKED_BYTES:
        return None, [InputProblem(shown, None, None,
                                   f"a spreadsheet of at most {size_in_mb(MAX_UNPACKED_BYTES)} MB unpacked; "
                                   f"this one unpacks to {size_in_mb(unpacked)} MB")]
    try:
        book = python_calamine.CalamineWorkbook.from_filelike(io.BytesIO(data))
        names = list(book.sheet_names)
        if not names:
            return None, [InputProblem(shown, None, None, "a spreadsheet with at least one sheet")]
        if sheet is not None and sheet not in names:
            close = difflib.get_close_matches(sheet, names, n=1, cutoff=0.6)
            hint = f"; did you mean {close[0]}?" if close else ""
            return None, [InputProblem(shown, None, "sheet", f"a sheet of this file: {', '.join(names)}{hint}",
                                       sheet)]
        name = sheet if sheet is not None else names[0]
        cells = book.get_sheet_by_name(name).to_python(skip_empty_area=False)
    except Exception as error:  # the reader's own errors: a damaged or password-protected file
        return None, [InputProblem(shown, None, None, "a readable .xlsx, .xlsm, .xls or .ods spreadsheet",
                                   clip(f"{type(error).__name__}: {error}"))]
    header_rows: list[list[str]] = []
    header_number = 0
    rows: list[list[Any]] = []
    numbers: list[int] = []
    for index in range(profile.skip_rows, len(cells)):
        row = cells[index]
        blank = not any(map(cell_text, row))  # also cells holding only spaces
        if len(header_rows) < profile.header_rows and (header_rows or not blank):
            header_rows.append([cell_text(cell) for cell in row])
            header_number = header_number or index + 1
            continue
        if blank:
            continue
        rows.append(row)
        numbers.append(index + 1)
    if not header_rows:
        return None, [InputProblem(shown, None, None, "a header row naming the columns (the sheet has no "
                                   "non-empty row after the rows skipped)", sheet=name)]
    return Grid(shown, name, _joined_header(header_rows), header_number, rows, numbers), []


def _unpacked_size(data: bytes) -> int:
    """Total size of the members of a zip container (.xlsx, .ods), as its directory states; 0 for
    other files (.xls) or an unreadable directory (the reader then reports the damage)."""
    try:
        with zipfile.ZipFile(io.BytesIO(data)) as archive:
            return sum(member.file_size for member in archive.infolist())
    except (zipfile.BadZipFile, OSError, ValueError):
        return 0
