"""Reading files as they come through import profiles (``imports:`` in project.yaml).

An entry of ``imports:`` names files (a glob inside the project folder), a profile (a YAML
file the user writes once per layout) and, for a spreadsheet, a sheet. This module checks
the entries and the profiles (with ``reportgen.inputs.checker.Checker``, every problem
collected), reads CSV/TXT files and ``.xlsx``/``.ods`` spreadsheets into a grid of cells,
and turns the grid into a ``CsvTable`` of our field names (``ImportedTable``). The rows are
then checked by the same functions as native rows (``check_results``, ``check_links``,
called by ``reportgen.inputs.project``); ``ImportedTable.remap`` rewrites their problems to
name the original file, row (and sheet) and header.

Spreadsheets are read with python-calamine: one reader for .xlsx, .xlsm, .xls and .ods, written
in Rust, that returns numbers, dates and times as the file stores them and formulas as their
cached values.
"""
from __future__ import annotations

import codecs
import csv
import dataclasses
import difflib
import io
import zipfile
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from datetime import date, datetime, time, timedelta
from pathlib import Path
from typing import Any, Final

import numpy as np

from reportgen.errors import InputProblem
from reportgen.inputs.checker import DECIMAL_HINT, Checker, match_enum
from reportgen.inputs.csvread import CsvTable
from reportgen.inputs.files import (MAX_FILE_BYTES, as_written, clip, is_inside, read_bytes, read_yaml,
                                    shown_path, size_in_mb)
from reportgen.model import Direction, ImportSource

ENTRY_KEYS: Final = ("files", "sheet", "profile")
PROFILE_KEYS: Final = ("as", "delimiter", "decimal", "encoding", "skip_rows", "header_rows", "columns",
                       "values", "date_format", "wide", "constants")
KINDS: Final = ("results", "links")
# Fields a results profile may map besides the results columns: tested_at in two cells.
SPLIT_DATE: Final = ("tested_date", "tested_time")
# Fields holding numbers: with ``decimal: ","`` their comma is read as the decimal point.
NUMBER_FIELDS: Final = frozenset({"strand", "wavelength_nm", "loss_db", "length", "length_m",
                                  "length_ft", "strands", "connections", "splices"})
SPREADSHEET_SUFFIXES: Final = (".xlsx", ".xlsm", ".xls", ".ods")
TEXT_SUFFIXES: Final = (".csv", ".txt", ".tsv")
DETECTED_DELIMITERS: Final = (",", ";", "\t", "|")
MAX_SKIP_ROWS: Final = 10_000
MAX_HEADER_ROWS: Final = 10  # rows a header may span (merged cells over sub-headers)
# largest spreadsheet read, unpacked (a zip packs a sheet some 10-20 times): a guard against
# a small file that would unpack to gigabytes
MAX_UNPACKED_BYTES: Final = 4 * MAX_FILE_BYTES
OUTPUT_FOLDER: Final = "report"  # the default output folder (docs §1): never read as input
TIME_FORMATS: Final = ("%H:%M:%S", "%H:%M")


@dataclass(frozen=True)
class Columns:
    """The contract's columns of one kind of table: required groups (one of each) and optional."""

    required: tuple[tuple[str, ...], ...]
    optional: tuple[str, ...]

    @property
    def fields(self) -> tuple[str, ...]:
        return tuple(dict.fromkeys([*(name for group in self.required for name in group), *self.optional]))


@dataclass(frozen=True)
class Profile:
    """A checked profile file."""

    path: str  # project-relative
    kind: str  # results or links
    delimiter: str | None
    decimal: str
    encoding: str
    skip_rows: int
    header_rows: int  # rows the header spans; their texts are joined per column (_joined_header)
    columns: Mapping[str, tuple[str, ...]]  # our field -> their headers, first present wins
    values: Mapping[str, Mapping[str, str]]  # field -> their spelling (case-folded) -> ours
    spellings: Mapping[str, tuple[str, ...]]  # field -> their spellings as written (for messages)
    date_formats: tuple[str, ...]
    wide_field: str | None
    wide: tuple[tuple[str, Mapping[str, str]], ...]  # (their header, {our field: value})
    constants: Mapping[str, str]


@dataclass(frozen=True)
class Entry:
    """One checked entry of ``imports:``."""

    number: int  # 1-based
    pattern: str
    sheet: str | None
    profile: Profile
    files: tuple[Path, ...]  # matched, sorted by project-relative path


def _unknown_keys(check: Checker, data: Mapping[Any, Any], known: Sequence[str], path: str) -> None:
    """Every key not in ``known`` is a problem, with the known key it most likely meant."""
    for key in data:
        if key in known:
            continue
        text = clip(str(key))
        close = difflib.get_close_matches(str(key).lower(), known, n=1, cutoff=0.6)
        hint = f"; did you mean {close[0]}?" if close else ""
        check.problem(f"{path}.{text}" if path else text, f"one of the keys {', '.join(known)}{hint}")


def _texts(value: Any) -> tuple[str, ...] | None:
    """A text or a non-empty list of texts (numbers as written), else None."""
    items = value if isinstance(value, list) else [value]
    if not items or any(isinstance(item, (Mapping, list, bool)) or item is None
                        or not as_written(item).strip() for item in items):
        return None
    return tuple(as_written(item).strip() for item in items)


def _field_key(check: Checker, key: Any, fields: Sequence[str], path: str) -> str | None:
    if isinstance(key, str) and key in fields:
        return key
    close = difflib.get_close_matches(str(key).lower(), fields, n=1, cutoff=0.6)
    hint = f"; did you mean {close[0]}?" if close else ""
    check.problem(f"{path}.{clip(str(key))}", f"one of our fields {', '.join(fields)}{hint}")
    return None


def check_profile(data: Any, root: Path, shown: str, kinds: Mapping[str, Columns]
                  ) -> tuple[Profile | None, list[InputProblem]]:
    """Check a parsed profile file; ``kinds`` gives the columns of results and links."""
    check = Checker(root, shown)
    if not isinstance(data, Mapping):
        check.problem(None, "a YAML mapping with as and columns",
                      "an empty file" if data is None else type(data).__name__)
        return None, check.problems
    _unknown_keys(check, data, PROFILE_KEYS, "")
    kind = check.text(data, "as", "as", required=True)
    if kind is not None and kind not in kinds:
        check.problem("as", f"one of {', '.join(kinds)}", kind)
        kind = None
    columns_of = kinds.get(kind or "", None)
    fields = (*columns_of.fields, *(SPLIT_DATE if kind == "results" else ())) if columns_of else ()

    delimiter = data.get("delimiter")  # not trimmed: a tab is a delimiter
    if delimiter is not None and (not isinstance(delimiter, str) or len(delimiter) != 1
                                  or delimiter in ('"', "\n", "\r")):
        check.problem("delimiter", 'one character, e.g. ";" or "\\t" (a tab)', delimiter)
        delimiter = None
    decimal = check.text(data, "decimal", "decimal") or "."
    if decimal not in (".", ","):
        check.problem("decimal", 'one of "." or ","', decimal)
    encoding = check.text(data, "encoding", "encoding") or "utf-8-sig"
    try:
        encoding = codecs.lookup(encoding).name
        if encoding == "utf-8":
            encoding = "utf-8-sig"  # a byte-order mark is allowed, as in every text input
    except LookupError:
        check.problem("encoding", "a text encoding Python knows, e.g. utf-8, cp1252, latin-1", encoding)
    skip_rows = 0
    if data.get("skip_rows") is not None:
        value = data["skip_rows"]
        if isinstance(value, bool) or not isinstance(value, int) or not 0 <= value <= MAX_SKIP_ROWS:
            check.problem("skip_rows", f"a whole number of lines from 0 to {MAX_SKIP_ROWS}", value)
        else:
            skip_rows = int(value)
    header_rows = 1
    if data.get("header_rows") is not None:
        value = data["header_rows"]
        if isinstance(value, bool) or not isinstance(value, int) or not 1 <= value <= MAX_HEADER_ROWS:
            check.problem("header_rows", f"a whole number of rows from 1 to {MAX_HEADER_ROWS}", value)
        else:
            header_rows = int(value)

    given: dict[str, str] = {}  # field -> where the profile gives it (for "given twice")

    def claim(name: str, where: str) -> bool:
        if name in given:
            check.problem(where, f"each field given once (already given by {given[name]})")
            return False
        given[name] = where
        return True

    columns: dict[str, tuple[str, ...]] = {}
    section = data.get("columns")
    if section is None:
        if "columns" not in data and data.get("wide") is None:
            check.problem("columns", "a mapping of our fields to the file's headers (required key is missing)")
    elif not isinstance(section, Mapping):
        check.problem("columns", "a mapping of our fields to the file's headers", section)
    elif fields:
        for key, value in section.items():
            name = _field_key(check, key, fields, "columns")
            if name is None:
                continue
            headers = _texts(value)
            if headers is None:
                check.problem(f"columns.{name}", "a header as the file writes it, or a list of them", value)
            elif claim(name, f"columns.{name}"):
                columns[name] = headers

    wide_field = None
    wide: list[tuple[str, Mapping[str, str]]] = []
    section = data.get("wide")
    if section is not None:
        if kind == "links":
            check.problem("wide", "no wide layout for links (one row is one link)")
        elif not isinstance(section, Mapping) or len(section) != 1:
            check.problem("wide", "a mapping of one field (e.g. loss_db) to its columns", section)
        elif fields:
            key, spread = next(iter(section.items()))
            wide_field = _field_key(check, key, fields, "wide")
            path = f"wide.{wide_field}"
            if wide_field is not None and not claim(wide_field, path):
                wide_field = None
            if wide_field is not None and (not isinstance(spread, Mapping) or not spread):
                check.problem(path, "a mapping of the file's headers to the fields they fix, "
                                    "e.g. \"Loss 850\": {wavelength_nm: 850}", spread)
                wide_field = None
            elif wide_field is not None:
                fixed_fields: set[str] = set()
                for header, fixed in spread.items():
                    place = f"{path}.{clip(str(header))}"
                    if not isinstance(fixed, Mapping) or not fixed:
                        check.problem(place, "a mapping of fields to values, e.g. {wavelength_nm: 850}",
                                      fixed)
                        continue
                    values: dict[str, str] = {}
                    for fixed_key, fixed_value in fixed.items():
                        name = _field_key(check, fixed_key, fields, place)
                        text = _texts(fixed_value)
                        if name is None:
                            continue
                        if text is None or len(text) != 1:
                            check.problem(f"{place}.{name}", "one value", fixed_value)
                            continue
                        values[name] = text[0]
                    if fixed_fields and set(values) != fixed_fields:
                        check.problem(place, f"the same fields for every column ({', '.join(sorted(fixed_fields))})")
                    fixed_fields = fixed_fields or set(values)
                    wide.append((as_written(header).strip(), values))
                for name in sorted(fixed_fields):
                    claim(name, path)

    constants: dict[str, str] = {}
    section = data.get("constants")
    if section is not None:
        if not isinstance(section, Mapping):
            check.problem("constants", "a mapping of fields to values", section)
        elif fields:
            for key, value in section.items():
                name = _field_key(check, key, fields, "constants")
                text = _texts(value)
                if name is None:
                    continue
                if text is None or len(text) != 1:
                    check.problem(f"constants.{name}", "one value", value)
                elif claim(name, f"constants.{name}"):
                    constants[name] = text[0]

    values_of: dict[str, dict[str, str]] = {}
    spellings: dict[str, tuple[str, ...]] = {}
    section = data.get("values")
    if section is not None:
        if not isinstance(section, Mapping):
            check.problem("values", "a mapping of fields to {our value: their spellings}", section)
        elif fields:
            for key, mapping in section.items():
                name = _field_key(check, key, fields, "values")
                if name is None:
                    continue
                path = f"values.{name}"
                if name not in columns:
                    check.problem(path, "a field read from a column (mapped under columns)")
                    continue
                if not isinstance(mapping, Mapping) or not mapping:
                    check.problem(path, "a mapping of our value to their spelling(s), e.g. {ab: [\"A->B\"]}",
                                  mapping)
                    continue
                table: dict[str, str] = {}
                written: list[str] = []
                for ours, theirs in mapping.items():
                    ours_text = as_written(ours).strip()
                    if name == "direction":
                        member = match_enum(Direction, ours_text)
                        if member is None:
                            check.problem(f"{path}.{clip(ours_text)}", "one of ab, ba")
                            continue
                        ours_text = member.value
                    texts = _texts(theirs)
                    if texts is None:
                        check.problem(f"{path}.{clip(ours_text)}", "their spelling, or a list of them", theirs)
                        continue
                    for text in texts:
                        folded = text.casefold()
                        if folded in table and table[folded] != ours_text:
                            check.problem(f"{path}.{clip(ours_text)}",
                                          f"each spelling for one value only ({text!r} is also given "
                                          f"for {table[folded]})")
                        table[folded] = ours_text
                        written.append(text)
                values_of[name] = table
                spellings[name] = tuple(written)

    date_formats: tuple[str, ...] = ()
    if data.get("date_format") is not None:
        formats = _texts(data["date_format"])
        if formats is None or any("%" not in text for text in formats):
            check.problem("date_format", 'a strptime format such as "%d.%m.%Y", or a list of them',
                          data["date_format"])
        else:
            date_formats = formats

    if columns_of is not None:
        if "tested_time" in given and "tested_date" not in given:
            check.problem("columns.tested_time", "tested_date as well (the time goes with a date)")
        if "tested_date" in given and "tested_at" in given:
            check.problem("columns.tested_date", "either tested_at or tested_date (+ tested_time), not both")
        for group in columns_of.required:
            alternatives = (*group, "tested_date") if group == ("tested_at",) else group
            if not any(name in given for name in alternatives):
                wanted = " or ".join(alternatives)
                check.problem("columns", f"a mapping for {wanted} (under columns, wide or constants): "
                                         f"a {kind} row needs it")

    if check.problems or kind is None:
        return None, check.problems
    return Profile(path=shown, kind=kind, delimiter=delimiter, decimal=decimal, encoding=encoding,
                   skip_rows=skip_rows, header_rows=header_rows, columns=columns, values=values_of,
                   spellings=spellings, date_formats=date_formats, wide_field=wide_field, wide=tuple(wide),
                   constants=constants), []


def check_imports(data: Any, root: Path, kinds: Mapping[str, Columns]
                  ) -> tuple[list[Entry], list[InputProblem], list[str], tuple[str, ...]]:
    """The ``imports:`` list of the parsed project.yaml ``data``: the usable entries, problems,
    the profiles read, and per entry the kind (``as:``) its profile declares, usable or not
    ("" when unknown), so that a broken links entry neither brings a "links.csv not found" nor
    has every imported result's link_id refused. A top-level key that looks like a misspelt
    ``imports`` is a problem."""
    check = Checker(root, "project.yaml")
    if not isinstance(data, Mapping):
        return [], [], [], ()
    for key in data:
        if isinstance(key, str) and key != "imports" and difflib.get_close_matches(
                key.lower(), ["imports"], n=1, cutoff=0.8) and "imports" not in data:
            check.problem(clip(key), "a key the format knows (did you mean imports?)")
    value = data.get("imports")
    if value is None:
        return [], check.problems, [], ()
    if not isinstance(value, list):
        check.problem("imports", "a list of entries, each with files and profile", value)
        return [], check.problems, [], ()
    kind_of: dict[Path, str] = {}  # profile -> the kind it declares
    declared: list[str] = []
    problems: list[InputProblem] = []
    profiles: dict[Path, Profile | None] = {}
    read: list[str] = []
    entries: list[Entry] = []
    for number, item in enumerate(value, start=1):
        path = f"imports[{number}]"
        if not isinstance(item, Mapping):
            check.problem(path, "a mapping with files and profile", item)
            continue
        _unknown_keys(check, item, ENTRY_KEYS, path)
        pattern = check.text(item, "files", f"{path}.files", required=True)
        sheet = check.text(item, "sheet", f"{path}.sheet")
        profile_text = check.text(item, "profile", f"{path}.profile", required=True)
        profile = None
        if profile_text is not None:
            resolved = check.inside_path(profile_text, f"{path}.profile", "a profile YAML file")
            if resolved is not None and not resolved.is_file():
                check.problem(f"{path}.profile", "an existing profile file inside the project folder",
                              profile_text)
            elif resolved is not None:
                if resolved not in profiles:
                    shown = shown_path(root, resolved)
                    read.append(shown)
                    profile_data, yaml_problems = read_yaml(resolved, shown)
                    checked = None
                    kind = profile_data.get("as") if isinstance(profile_data, Mapping) else None
                    kind_of[resolved] = kind.strip() if isinstance(kind, str) else ""
                    if profile_data is not None or not yaml_problems:
                        checked, profile_problems = check_profile(profile_data, root, shown, kinds)
                        yaml_problems += profile_problems
                    problems += yaml_problems
                    profiles[resolved] = checked
                profile = profiles[resolved]
                declared.append(kind_of[resolved])
        files = _matched(check, root, pattern, f"{path}.files") if pattern is not None else None
        if profile is not None and files is not None:
            entries.append(Entry(number, pattern, sheet, profile, files))
    return entries, check.problems + problems, read, tuple(declared)


def _matched(check: Checker, root: Path, pattern: str, path: str) -> tuple[Path, ...] | None:
    """Files the glob ``pattern`` matches inside the project folder, sorted; hidden and lock files
    (``.x``, ``~$x``) and the default output folder ``report/`` skipped."""
    if Path(pattern).is_absolute() or ".." in Path(pattern).parts:
        check.problem(path, "a file pattern relative to the project folder, e.g. exports/*.csv", pattern)
        return None
    try:
        found = sorted(root.glob(pattern), key=lambda found: shown_path(root, found))
    except (ValueError, OSError) as error:
        check.problem(path, "a file pattern relative to the project folder, e.g. exports/*.csv",
                      f"{pattern} ({error})")
        return None
    files = []
    for candidate in found:
        if candidate.name.startswith((".", "~$")) or not candidate.is_file():
            continue
        if candidate.relative_to(root).parts[0] == OUTPUT_FOLDER:  # written by reportgen, never read
            continue
        if not is_inside(root, candidate):
            check.problem(path, "files inside the project folder; "
                                f"{shown_path(root, candidate)} is a symbolic link leading outside it")
            return None
        files.append(candidate)
    if not files:
        check.problem(path, "a pattern matching at least one file in the project folder (none matched)",
                      pattern)
        return None
    return tuple(files)


@dataclass
class Grid:
    """The cells of one file: the header row and the data rows, with their line or row numbers."""

    file: str
    sheet: str | None
    header: list[str]
    header_number: int
    rows: list[list[Any]]
    numbers: list[int]


def _cell_text(value: Any) -> str:
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
        blank = not any(map(_cell_text, row))  # also cells holding only spaces
        if len(header_rows) < profile.header_rows and (header_rows or not blank):
            header_rows.append([_cell_text(cell) for cell in row])
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
        return [_cell_text(row[position]) if position < len(row) else "" for row in rows]

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
