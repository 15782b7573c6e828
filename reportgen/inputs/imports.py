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
import difflib
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Final

from reportgen.errors import InputProblem
from reportgen.inputs.checker import Checker, match_enum
from reportgen.inputs.files import as_written, clip, is_inside, read_yaml, shown_path
from reportgen.model import Direction

ENTRY_KEYS: Final = ("files", "sheet", "profile")
PROFILE_KEYS: Final = ("as", "delimiter", "decimal", "encoding", "skip_rows", "header_rows", "columns",
                       "values", "date_format", "wide", "constants")
KINDS: Final = ("results", "links")
# Fields a results profile may map besides the results columns: tested_at in two cells.
SPLIT_DATE: Final = ("tested_date", "tested_time")
MAX_SKIP_ROWS: Final = 10_000
MAX_HEADER_ROWS: Final = 10  # rows a header may span (merged cells over sub-headers)
OUTPUT_FOLDER: Final = "report"  # the default output folder (docs §1): never read as input


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
