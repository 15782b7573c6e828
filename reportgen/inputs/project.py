"""Loading and validating a project folder (project format v1) into a ``Project``.

``load_project`` reads project.yaml, links.csv and results/*.csv and returns a
fully validated ``Project``, or raises ``InputError`` holding every problem found,
in file order (project.yaml, its limit file, links.csv, results files by name;
within a CSV file by line). The folder is only read, never written.
"""
from __future__ import annotations

import dataclasses
import hashlib
from collections.abc import Sequence
from pathlib import Path
from typing import Final

import pandas as pd

from reportgen.errors import InputError, InputProblem
from reportgen.inputs import import_grid, import_table
from reportgen.inputs import imports as importing
from reportgen.inputs.apptable import check_application_ids, load_applications
from reportgen.inputs.csvread import read_csv
from reportgen.inputs.files import clip, is_inside, outside_problem, printable, read_bytes, read_yaml, shown_path
from reportgen.inputs.links import LINK_OPTIONAL, LINK_REQUIRED, check_links, wavelength_coverage
from reportgen.inputs.otdr import load_otdr
from reportgen.inputs.project_yaml import Settings, check_project_yaml
from reportgen.inputs.records import load_inspections, load_references
from reportgen.inputs.results import LENGTH_COLUMNS, Context, check_results, empty_results
from reportgen.inputs.results import OPTIONAL as RESULT_OPTIONAL
from reportgen.inputs.results import REQUIRED as RESULT_REQUIRED
from reportgen.model import ImportSource, InputFile, Link, Project

LINKS_FILE: Final = "links.csv"
RESULTS_DIR: Final = "results"
# What an import profile's rows become (``as:``), with the columns of that contract table.
IMPORT_KINDS: Final = {
    "results": importing.Columns(RESULT_REQUIRED, RESULT_OPTIONAL),
    "links": importing.Columns(LINK_REQUIRED, LINK_OPTIONAL),
}


def load_project(project_dir: Path, *, absent: frozenset[str] = frozenset()) -> Project:
    """Read and validate the project folder ``project_dir``.

    ``absent``: OTDR trace files missing on purpose (see :func:`reportgen.inputs.otdr.load_otdr`).

    Raises
    ------
    InputError
        With every problem found, in file order; nothing is returned partly.
    """
    given = Path(project_dir)
    if not given.is_dir():
        raise InputError([InputProblem(given.as_posix(), None, None, "an existing project folder")])
    root = given.resolve()
    problems: list[InputProblem] = []

    settings = Settings()
    data = None
    yaml_path = root / "project.yaml"
    if yaml_path.is_symlink() and not is_inside(root, yaml_path):
        problems.append(outside_problem("project.yaml"))
    elif not yaml_path.is_file():
        problems.append(InputProblem("project.yaml", None, None,
                                     "a file project.yaml in the project folder (not found)"))
    else:
        data, yaml_problems = read_yaml(yaml_path, "project.yaml")
        problems += yaml_problems
        if data is not None or not yaml_problems:  # None with problems: unreadable or bad syntax
            settings, setting_problems = check_project_yaml(data, root)
            problems += setting_problems
    entries, import_problems, profiles_read, declared = importing.check_imports(data, root, IMPORT_KINDS)
    problems += import_problems
    link_entries = [entry for entry in entries if entry.profile.kind == "links"]
    result_entries = [entry for entry in entries if entry.profile.kind == "results"]
    sources: list[ImportSource] = []

    links, all_link_ids, link_problems = _load_links(root, settings,
                                                      required="links" not in declared)
    if link_entries:
        links, all_link_ids, imported_problems = _import_links(root, link_entries, settings, links,
                                                               all_link_ids, sources)
        link_problems += imported_problems
    if declared.count("links") > len(link_entries):  # an entry of links could not be used
        all_link_ids = None  # which link_ids exist is unknown: results are not checked against them
    problems += wavelength_coverage(settings, links)
    problems += link_problems
    applications = load_applications()
    links, application_problems = check_application_ids(links, applications)
    problems += application_problems

    context = Context(links=None if all_link_ids is None else {link.link_id: link for link in links},
                      all_link_ids=all_link_ids, limits=settings.limits,
                      instruments=settings.instruments, units=settings.units,
                      applications=applications,
                      links_from=_links_from(root, sources))
    frames: list[pd.DataFrame] = []
    files: list[str] = []
    for path in _result_files(root, problems):
        shown = f"{RESULTS_DIR}/{path.name}"
        if not is_inside(root, path):
            problems.append(outside_problem(shown))
            continue
        files.append(shown)
        table, table_problems = read_csv(path, shown, required=RESULT_REQUIRED, optional=RESULT_OPTIONAL,
                                         decimal=("loss_db", *LENGTH_COLUMNS))
        if table is None:
            problems += table_problems
            continue
        frame, row_problems = check_results(table, context)
        problems += _by_line(table_problems + row_problems)
        if frame is not None and len(frame):
            frames.append(frame)
    for entry in result_entries:
        for path in entry.files:
            shown = shown_path(root, path)
            imported, import_problems = _imported_table(entry, path, shown)
            if imported is None:
                problems += import_problems
                continue
            sources.append(imported.source)
            frame, row_problems = check_results(imported.table, context)
            problems += imported.remap(row_problems, positions=True)
            if frame is not None and len(frame) and not imported.problems:
                frame["source_line"] = imported.numbers
                frame["source"] = import_table.source_texts(shown, imported.sheet, imported.numbers)
                frames.append(frame)

    otdr_traces, otdr_files, otdr_problems = load_otdr(root, links, settings.units, all_link_ids,
                                                          absent)
    problems += otdr_problems

    record_files: list[str] = []
    references, record_problems = load_references(root, settings.instruments, record_files)
    problems += record_problems
    inspections, record_problems = load_inspections(root, context.links, record_files)
    problems += record_problems

    if problems:
        raise InputError([_printable(problem) for problem in problems])
    assert settings.info and settings.testing and settings.limits and settings.report
    results = pd.concat(frames, ignore_index=True) if frames else empty_results()
    files_read = _files_read(root, settings, [*files, *profiles_read, *(source.file for source in sources),
                                              *otdr_files, *record_files])
    return Project(
        root=root,
        info=settings.info,
        testing=settings.testing,
        links=tuple(links),
        results=results,
        limits=settings.limits,
        components=settings.components or {},
        transceivers=settings.transceivers or {},
        instruments=settings.instruments or (),
        technicians=settings.technicians,
        report=settings.report,
        result_files=tuple(files),
        files_read=files_read,
        input_files=_input_files(root, files_read, results, links, sources),
        imports=tuple(sorted(sources, key=lambda source: source.entry)),
        applications=applications,
        otdr=otdr_traces,
        references=references,
        inspections=inspections,
    )


def _result_files(root: Path, problems: list[InputProblem]) -> list[Path]:
    """results/*.csv sorted by name; hidden files (``.x.csv``) and lock files (``~$x.csv``) skipped.

    A name that is a symbolic link leading outside the project folder is listed too (whatever it
    points at) so that the caller refuses it, in name order, without reading it.
    """
    folder = root / RESULTS_DIR
    if folder.is_symlink() and not is_inside(root, folder):
        problems.append(InputProblem(RESULTS_DIR, None, None,
                                     "a folder inside the project folder; this is a symbolic link leading "
                                     "outside it and was not read"))
        return []
    if not folder.exists():
        return []
    if not folder.is_dir():
        problems.append(InputProblem(RESULTS_DIR, None, None, "a folder of results CSV files"))
        return []
    # A symbolic link leading outside the folder is kept here and refused by the caller, in name order.
    return sorted(
        (path for path in folder.iterdir()
         if path.suffix.lower() == ".csv" and not path.name.startswith((".", "~$"))
         and (path.is_file() or not is_inside(root, path))),
        key=lambda path: path.name)


def _links_from(root: Path, sources: Sequence[ImportSource]) -> str:
    """Where the links were read, as a results message names it: links.csv, or the files
    imported as links (with links.csv when it is there too)."""
    files = [source.file for source in sources if source.kind == "links"]
    if not files:
        return LINKS_FILE
    if (root / LINKS_FILE).is_file():
        files.insert(0, LINKS_FILE)
    return "the links of " + ", ".join(dict.fromkeys(files))


def _imported_table(entry: importing.Entry, path: Path, shown: str
                    ) -> tuple[import_table.ImportedTable | None, list[InputProblem]]:
    """A file of an ``imports:`` entry read and mapped to our fields (None with its problems)."""
    grid, problems = import_grid.read_grid(path, shown, entry.profile, entry.sheet)
    if grid is None:
        return None, problems
    return import_table.build_table(grid, entry, IMPORT_KINDS[entry.profile.kind])


def _import_links(root: Path, entries: Sequence[importing.Entry], settings: Settings, links: list[Link],
                  all_link_ids: frozenset[str] | None, sources: list[ImportSource]
                  ) -> tuple[list[Link], frozenset[str] | None, list[InputProblem]]:
    """Links of the ``imports:`` entries with ``as: links``, after those of links.csv; a link_id
    given twice across files is a problem at its second place."""
    problems: list[InputProblem] = []
    first: dict[str, str] = {link.link_id: f"{LINKS_FILE} line {link.line}" for link in links}
    ids = set(all_link_ids or ())
    failed = all_link_ids is None
    links = list(links)
    for entry in entries:
        for path in entry.files:
            shown = shown_path(root, path)
            imported, table_problems = _imported_table(entry, path, shown)
            if imported is None:
                problems += table_problems
                failed = True
                continue
            table = imported.table
            found, row_problems = check_links(table, settings)
            kept: list[Link] = []
            for link in found:
                place = (f"{shown} [{imported.sheet}] row {link.line}" if imported.sheet is not None
                         else f"{shown} line {link.line}")
                if link.link_id in first:
                    row_problems.append(InputProblem(shown, link.line, "link_id",
                                                     f"a link_id not used before (first used in "
                                                     f"{first[link.link_id]})", clip(link.link_id)))
                    continue
                first[link.link_id] = place
                kept.append(link)
            problems += imported.remap(row_problems, positions=False)
            links += kept
            ids |= set(table.columns.get("link_id", ())) - {""}
            sources.append(dataclasses.replace(imported.source,
                                               link_ids=tuple(link.link_id for link in kept)))
    return links, None if failed else frozenset(ids), problems


def _load_links(root: Path, settings: Settings, *, required: bool = True
                ) -> tuple[list[Link], frozenset[str] | None, list[InputProblem]]:
    path = root / LINKS_FILE
    if path.is_symlink() and not is_inside(root, path):
        return [], None, [outside_problem(LINKS_FILE)]
    if not path.is_file():
        if not required:  # an import entry provides the links
            return [], frozenset(), []
        return [], None, [InputProblem(LINKS_FILE, None, None,
                                       "a file links.csv in the project folder (not found)")]
    table, problems = read_csv(path, LINKS_FILE, required=LINK_REQUIRED, optional=LINK_OPTIONAL,
                               decimal=LENGTH_COLUMNS)
    if table is None:
        return [], None, problems
    if len(table) == 0:
        return [], None, problems or [InputProblem(LINKS_FILE, None, None,
                                                   "at least one link row below the header")]
    links, row_problems = check_links(table, settings)
    all_ids = frozenset(table.columns["link_id"]) - {""} if table.has("link_id") else None
    return links, all_ids, _by_line(problems + row_problems)


def _printable(problem: InputProblem) -> InputProblem:
    """The problem with file, field and expected text safe to print on a terminal (file names,
    column names and ids come from the folder); ``found`` is shown quoted and escaped anyway."""
    return dataclasses.replace(problem, file=printable(problem.file),
                               field=None if problem.field is None else printable(problem.field),
                               expected=printable(problem.expected),
                               sheet=None if problem.sheet is None else printable(problem.sheet))


def _by_line(problems: list[InputProblem]) -> list[InputProblem]:
    """Problems of one CSV file in line order (stable: checks of a line keep their order)."""
    return sorted(problems, key=lambda problem: problem.line or 0)


def _input_files(root: Path, files_read: Sequence[str], results: pd.DataFrame, links: Sequence[Link],
                 sources: Sequence[ImportSource]) -> tuple[InputFile, ...]:
    """Every file read with its size, SHA-256 and the rows it gave (the report's appendix)."""
    per_file = results["source_file"].value_counts().to_dict() if len(results) else {}
    imported_links: dict[str, int] = {}
    for source in sources:
        imported_links[source.file] = imported_links.get(source.file, 0) + len(source.link_ids)
    native_links = len(links) - sum(imported_links.values())
    listed = []
    for shown in files_read:
        data = (root / shown).read_bytes()  # read and checked above; hashed as it is now
        count = native_links if shown == LINKS_FILE else imported_links.get(shown, 0)
        listed.append(InputFile(shown, len(data), hashlib.sha256(data).hexdigest(),
                                results=int(per_file.get(shown, 0)), links=count))
    return tuple(listed)


def _files_read(root: Path, settings: Settings, result_files: list[str]) -> tuple[str, ...]:
    """Project-relative paths of every file read (see ``Project.files_read``)."""
    read = {"project.yaml", *result_files}
    if (root / LINKS_FILE).is_file():
        read.add(LINKS_FILE)
    if settings.limits is not None and settings.limits.origin != "built-in":
        read.add(settings.limits.origin)
    logo = settings.info.contractor.logo if settings.info is not None else None
    if logo is not None:
        read.add(logo.path.relative_to(root).as_posix())
    return tuple(sorted(read))


def read_files(project: Project) -> dict[str, bytes]:
    """The bytes of every file the project was read from (``Project.files_read``).

    For the manifest and the archive copy inside report.pdf. The files are read again,
    right after :func:`load_project`; a file that cannot be read now raises one
    :class:`InputError` naming every such file.
    """
    found: dict[str, bytes] = {}
    problems: list[InputProblem] = []
    for path in project.files_read:
        data, read_problems = read_bytes(project.root / path, path)
        problems += read_problems
        if data is not None:
            found[path] = data
    if problems:
        raise InputError(problems)
    return found
