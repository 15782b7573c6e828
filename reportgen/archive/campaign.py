"""One campaign as a build wrote it: summary.json and results.csv, read and checked."""
from __future__ import annotations

import csv
import hashlib
import io
import json
import math
from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Final, NamedTuple

from reportgen.errors import InputError, InputProblem, ReportgenError
from reportgen.export.results_csv import LIST_SEPARATOR, RESULTS_COLUMNS

SUMMARY: Final = "summary.json"
RESULTS: Final = "results.csv"
# Result rows that count: superseded and invalid rows are kept in the archive but are not
# compared (docs/project-format.md §5: a later valid row supersedes an earlier one).
COUNTED_VERDICTS: Final = frozenset({"pass", "fail"})
MAX_FILE_BYTES: Final = 200 * 1024 * 1024
# The columns the archive reads, in this order at the start of results.csv (docs/project-format.md
# §10.1: columns are only ever added, at the end; later ones are ignored here).
READ_COLUMNS: Final = RESULTS_COLUMNS[:16]
assert READ_COLUMNS[-1] == "source_line"


class ResultRow(NamedTuple):
    """One row of results.csv (a named tuple: campaigns of 100,000 rows are read often)."""

    link_id: str
    strand: int
    wavelength_nm: int
    direction: str
    loss_db: float | None
    tested_at: str
    limit_db: float | None
    margin_db: float | None
    verdict: str
    flags: str
    technician: str
    instrument: str
    measured_length_m: float | None
    note: str
    source_file: str
    source_line: int | None

    @property
    def key(self) -> tuple[int, int, str]:
        """What a result is compared by across campaigns: strand, wavelength, direction."""
        return (self.strand, self.wavelength_nm, self.direction)


@dataclass(frozen=True)
class Campaign:
    """A build's outputs: the summary document, its result rows and the files' digests."""

    label: str  # the folder, as given
    summary: Mapping[str, Any]
    rows: tuple[ResultRow, ...]
    files: Mapping[str, tuple[str, int]]  # name -> (sha256 hex, size in bytes)
    digest: str  # sha256 of summary.json and results.csv together: the campaign's identity
    links: Mapping[str, Mapping[str, Any]] = field(default_factory=dict)  # link_id -> summary entry

    @property
    def project(self) -> Mapping[str, Any]:
        project = self.summary.get("project")
        return project if isinstance(project, Mapping) else {}

    @property
    def tested_first(self) -> str | None:
        dates = [row.tested_at for row in self.rows if row.tested_at]
        return min(dates) if dates else None

    @property
    def tested_last(self) -> str | None:
        dates = [row.tested_at for row in self.rows if row.tested_at]
        return max(dates) if dates else None


def campaign_digest(summary_bytes: bytes, results_bytes: bytes) -> str:
    """sha256 over both files, each preceded by its length (no two pairs give one stream)."""
    digest = hashlib.sha256()
    for data in (summary_bytes, results_bytes):
        digest.update(len(data).to_bytes(8, "big"))
        digest.update(data)
    return digest.hexdigest()


MAX_PDF_BYTES: Final = 2**30  # largest report.pdf read by 'archive add' (1 GB)


def read_build_folder(folder: Path) -> Campaign:
    """Read FOLDER/summary.json and FOLDER/results.csv as a build wrote them."""
    folder = Path(folder)
    if not folder.is_dir():
        raise ReportgenError(f"{folder}: expected a build output folder (summary.json and "
                             f"results.csv), found no such folder")
    missing = [name for name in (SUMMARY, RESULTS) if not (folder / name).is_file()]
    if missing:
        hint = (" (this is a project folder: build it first, 'reportgen build PROJECT -o DIR "
                "--data-only', and give DIR)" if (folder / "project.yaml").is_file() else "")
        raise ReportgenError(f"{folder}: expected a build output folder holding summary.json and "
                             f"results.csv (written by 'reportgen build'); missing: "
                             f"{', '.join(missing)}{hint}")
    data = {}
    for name in (SUMMARY, RESULTS):
        path = folder / name
        if path.stat().st_size > MAX_FILE_BYTES:
            raise ReportgenError(f"{path}: larger than {MAX_FILE_BYTES // 2**20} MB; "
                                 "not a build output")
        data[name] = path.read_bytes()
    return parse_campaign(str(folder), data[SUMMARY], data[RESULTS])


def read_build(path: Path) -> Campaign:
    """A build output folder, or a report.pdf that carries its summary.json and results.csv
    (the archive-grade PDF embeds both; see docs/project-format.md §10)."""
    path = Path(path)
    if path.is_file() and path.suffix.lower() == ".pdf":
        return read_report_pdf(path)
    return read_build_folder(path)


def read_report_pdf(path: Path) -> Campaign:
    """The campaign embedded in a report.pdf written by 'reportgen build'."""
    from reportgen.export.manifest import RESULTS_NAME, SUMMARY_NAME
    from reportgen.pdf.archive import read_archive

    if path.stat().st_size > MAX_PDF_BYTES:
        raise ReportgenError(f"{path}: larger than {MAX_PDF_BYTES // 2**20} MB; not read")
    try:
        files = read_archive(path.read_bytes()).files
    except ReportgenError as error:
        raise ReportgenError(f"{path}: {error}") from None
    missing = [name for name in (SUMMARY_NAME, RESULTS_NAME) if name not in files]
    if missing:
        raise ReportgenError(f"{path}: expected a report.pdf written by 'reportgen build' with "
                             f"summary.json and results.csv inside; missing: {', '.join(missing)} "
                             f"(give the build output folder instead)")
    return parse_campaign(str(path), files[SUMMARY_NAME], files[RESULTS_NAME])


def parse_campaign(label: str, summary_bytes: bytes, results_bytes: bytes) -> Campaign:
    """Check both documents; every problem of both files in one InputError."""
    problems: list[InputProblem] = []
    summary = _parse_summary(label, summary_bytes, problems)
    rows = _parse_results(label, results_bytes, problems)
    if problems:
        raise InputError(problems)
    links = {entry["link_id"]: entry for entry in summary["links"]}
    files = {name: (hashlib.sha256(data).hexdigest(), len(data))
             for name, data in ((SUMMARY, summary_bytes), (RESULTS, results_bytes))}
    return Campaign(label, summary, tuple(rows), files,
                    campaign_digest(summary_bytes, results_bytes), links)


def _parse_summary(label: str, data: bytes, problems: list[InputProblem]) -> dict[str, Any]:
    name = f"{label}/{SUMMARY}"
    try:
        document = json.loads(data.decode("utf-8-sig"))
    except (UnicodeDecodeError, json.JSONDecodeError) as error:
        problems.append(InputProblem(name, getattr(error, "lineno", None), None,
                                     "a JSON document written by 'reportgen build'",
                                     str(error)))
        return {"links": []}
    if not isinstance(document, dict) or document.get("format") != 1:
        found = document.get("format") if isinstance(document, dict) else type(document).__name__
        problems.append(InputProblem(name, None, "format", "1 (summary.json of this version)",
                                     repr(found)))
        return {"links": []}
    links = document.get("links")
    if not isinstance(links, list):
        problems.append(InputProblem(name, None, "links", "a list of links", repr(links)))
        return {"links": []}
    seen: set[str] = set()
    for index, entry in enumerate(links):
        where = f"links[{index}]"
        if not isinstance(entry, dict) or not isinstance(entry.get("link_id"), str) \
                or not entry["link_id"]:
            problems.append(InputProblem(name, None, f"{where}.link_id", "a non-empty text",
                                         repr(entry.get("link_id") if isinstance(entry, dict)
                                              else entry)))
            continue
        if entry["link_id"] in seen:
            problems.append(InputProblem(name, None, f"{where}.link_id", "each link once",
                                         entry["link_id"]))
        seen.add(entry["link_id"])
        if entry.get("verdict") not in ("pass", "fail", "incomplete"):
            problems.append(InputProblem(name, None, f"{where}.verdict",
                                         "pass, fail or incomplete", repr(entry.get("verdict"))))
    return document


def _parse_results(label: str, data: bytes, problems: list[InputProblem]) -> list[ResultRow]:
    name = f"{label}/{RESULTS}"
    try:
        text = data.decode("utf-8-sig")
    except UnicodeDecodeError as error:
        problems.append(InputProblem(name, None, None, "UTF-8 text", str(error)))
        return []
    reader = csv.reader(io.StringIO(text, newline=""))
    header = next(reader, None)
    if header is None or tuple(header[:len(READ_COLUMNS)]) != READ_COLUMNS:
        problems.append(InputProblem(name, 1, None,
                                     "the header of results.csv, starting "
                                     + ",".join(READ_COLUMNS),
                                     ",".join(header or [])))
        return []
    rows = []
    width = len(header)
    for line, cells in enumerate(reader, start=2):
        if not cells:
            continue
        if len(cells) != width:
            problems.append(InputProblem(name, line, None, f"{width} cells", str(len(cells))))
            continue
        # the common case, cells by position (the header starts with READ_COLUMNS); any
        # doubt: checked cell by cell below, naming the cell
        row = _fast_row(cells)
        if row is not None:
            rows.append(row)
            continue
        cell = dict(zip(header, cells))
        before = len(problems)
        strand = _int(cell, "strand", name, line, problems)
        wavelength = _int(cell, "wavelength_nm", name, line, problems)
        loss = _float(cell, "loss_db", name, line, problems)
        limit = _float(cell, "limit_db", name, line, problems)
        margin = _float(cell, "margin_db", name, line, problems)
        length = _float(cell, "measured_length_m", name, line, problems)
        source_line = _int(cell, "source_line", name, line, problems, optional=True)
        if not cell["link_id"]:
            problems.append(InputProblem(name, line, "link_id", "a link id", ""))
        if len(problems) != before:
            continue
        rows.append(ResultRow(
            link_id=_plain(cell["link_id"]), strand=strand, wavelength_nm=wavelength,
            direction=cell["direction"], loss_db=loss, tested_at=_plain(cell["tested_at"]),
            limit_db=limit, margin_db=margin, verdict=_plain(cell["verdict"]),
            flags=_plain(cell["flags"]), technician=_plain(cell["technician"]),
            instrument=_plain(cell["instrument"]), measured_length_m=length,
            note=_plain(cell["note"]), source_file=_plain(cell["source_file"]),
            source_line=source_line))
    return rows


def _fast_row(c: list[str]) -> ResultRow | None:
    """A row whose every cell is well-formed, converted without per-cell checks; None for any
    doubt (the checking path then names the cell)."""
    try:
        numbers = [float(c[i]) if c[i] else None for i in (4, 6, 7, 12)]
        if any(v is not None and not math.isfinite(v) for v in numbers) or not c[0]:
            return None
        return ResultRow(_plain(c[0]), int(c[1]), int(c[2]), c[3], numbers[0], _plain(c[5]),
                         numbers[1], numbers[2], _plain(c[8]), _plain(c[9]), _plain(c[10]),
                         _plain(c[11]), numbers[3], _plain(c[13]), _plain(c[14]),
                         int(c[15]) if c[15] else None)
    except ValueError:
        return None


def _plain(text: str) -> str:
    """A text cell without the apostrophe results.csv puts before formula-like text."""
    if text[:1] == "'" and text[1:2] in ("=", "+", "-", "@", "\t", "\r"):
        return text[1:]
    return text


def instruments_of(row: ResultRow) -> list[str]:
    return [part for part in row.instrument.split(LIST_SEPARATOR) if part]


def _int(cell: Mapping[str, str], column: str, name: str, line: int,
         problems: list[InputProblem], optional: bool = False) -> Any:
    text = cell[column]
    if optional and text == "":
        return None
    try:
        return int(text)
    except ValueError:
        problems.append(InputProblem(name, line, column, "a whole number", text))
        return None


def _float(cell: Mapping[str, str], column: str, name: str, line: int,
           problems: list[InputProblem]) -> float | None:
    text = cell[column]
    if text == "":
        return None
    try:
        value = float(text)
    except ValueError:
        value = math.nan
    if not math.isfinite(value):
        problems.append(InputProblem(name, line, column, "a number", text))
        return None
    return value
