"""OTDR inputs: ``testing.otdr`` of project.yaml, trace files ``otdr/**/*.sor``, the optional
``otdr/index.csv`` and event tables ``otdr/*.csv`` (docs/project-format.md §12).

Which link, strand and direction a trace file belongs to: its row of ``otdr/index.csv`` when
the index names it; else its GenParams: cable id = ``link_id`` of links.csv, fiber id = the
strand number, originating location = the link's ``end_a`` (direction ab) or ``end_b`` (ba),
compared after trimming and ignoring case. A file that matches no link is an error naming it.
"""
from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from datetime import datetime, timezone
from pathlib import Path
from typing import Any, Final

from reportgen.errors import InputProblem
from reportgen.inputs.checker import (
    DECIMAL_COMMA_TEXT,
    DECIMAL_HINT,
    NUMBER_TEXT,
    WAVELENGTH_RANGE_NM,
    Checker,
    enum_choices,
    match_enum,
)
from reportgen.inputs.csvread import read_csv
from reportgen.inputs.files import is_inside, outside_problem, read_bytes
from reportgen.inputs.sor import SorError, read_sor
from reportgen.model import (
    Direction,
    LengthUnit,
    Link,
    OtdrEvent,
    OtdrEventKind,
    OtdrSettings,
    OtdrTrace,
    Polish,
)
from reportgen.units import distance_from_time, ft_to_m

OTDR_DIR: Final = "otdr"
INDEX_FILE: Final = "index.csv"
OTDR_KEYS: Final = ("launch_cord_m", "receive_cord_m", "connection_db", "splice_db", "polish",
                    "reflectance_db", "pair_tolerance_m", "lsa_threshold_db", "length_tolerance_pct")
INDEX_REQUIRED: Final = (("file",), ("link_id",), ("strand",), ("direction",))
DISTANCE_COLUMNS: Final = ("distance", "distance_m", "distance_ft")
EVENTS_REQUIRED: Final = (("link_id",), ("strand",), ("wavelength_nm",), ("direction",), DISTANCE_COLUMNS,
                          ("event",), ("loss_db",), ("tested_at",), ("instrument",), ("technician",))
EVENTS_OPTIONAL: Final = ("reflectance_db", "pulse_ns", "group_index", "launch_cord_m", "receive_cord_m")
LAUNCH_WITHIN_M: Final = 1.0  # a trace-file event closer than this to the front panel is the launch
MAX_CORD_M: Final = 100_000.0


def otdr_settings(check: Checker, testing: Mapping[str, Any]) -> OtdrSettings | None:
    """``testing.otdr``; None when absent (defaults apply)."""
    section = check.section(testing, "otdr", "testing.otdr", "a mapping of OTDR settings", required=False)
    if section is None:
        return None
    values: dict[str, Any] = {}
    ranges = {"launch_cord_m": (0.0, MAX_CORD_M, "of 0 m or more"),
              "receive_cord_m": (0.0, MAX_CORD_M, "of 0 m or more"),
              "connection_db": (0.0, 10.0, "from 0 to 10 dB"),
              "splice_db": (0.0, 10.0, "from 0 to 10 dB"),
              "reflectance_db": (-100.0, 0.0, "from -100 to 0 dB"),
              "pair_tolerance_m": (0.0, 10_000.0, "from 0 to 10000 m"),
              "lsa_threshold_db": (0.0, 10.0, "from 0 to 10 dB"),
              "length_tolerance_pct": (0.0, 100.0, "from 0 to 100 (%)")}
    ok = True
    for key, (low, high, words) in ranges.items():
        if section.get(key) is None:
            continue
        number = check.number(section[key], f"testing.otdr.{key}", words, low, high)
        ok = ok and number is not None
        values[key] = number
    polish = check.choice(section, "polish", "testing.otdr.polish", Polish, Polish.UPC)
    if polish is None or not ok:
        return None
    return OtdrSettings(polish=polish, **values)


# ------------------------------------------------------------------ the otdr/ folder


def load_otdr(root: Path, links: Sequence[Link], units: LengthUnit | None,
              all_link_ids: frozenset[str] | None = None, absent: frozenset[str] = frozenset()
              ) -> tuple[tuple[OtdrTrace, ...], list[str], list[InputProblem]]:
    """Every trace of ``otdr/``: (traces, files read, problems).

    ``all_link_ids``: every id written in links.csv (None when it could not be read). A trace of
    a link whose row has problems of its own, or any trace when links.csv is unreadable, is
    skipped without a further message: the links.csv problem is the one to fix. ``absent``:
    trace files (project-relative paths) known to be missing on purpose (``reportgen verify``
    of a report that did not embed them); an index row naming one is skipped.
    """
    folder = root / OTDR_DIR
    if not folder.exists():
        return (), [], []
    if (folder.is_symlink() and not is_inside(root, folder)) or not folder.is_dir():
        return (), [], [InputProblem(OTDR_DIR, None, None, "a folder of OTDR files inside the project folder")]
    by_id = {link.link_id: link for link in links}
    problems: list[InputProblem] = []
    files: list[str] = []
    known_elsewhere = (all_link_ids or frozenset()) - set(by_id)
    index: dict[str, tuple[str, int, Direction, int]] = {}
    if (folder / INDEX_FILE).is_file():
        files.append(f"{OTDR_DIR}/{INDEX_FILE}")
        index = _read_index(root, folder / INDEX_FILE, by_id, problems)
    traces: list[OtdrTrace] = []
    paths = sorted((p for p in folder.rglob("*") if p.suffix.lower() == ".sor" and p.is_file()
                    and not p.name.startswith(".")), key=lambda p: p.relative_to(folder).as_posix())
    for path in paths:
        shown = path.relative_to(root).as_posix()
        if not is_inside(root, path):
            problems.append(outside_problem(shown))
            continue
        files.append(shown)
        trace = _trace_file(path, shown, index.pop(shown, None), by_id, problems)
        if trace is not None:
            traces.append(trace)
    for shown, (_l, _s, _d, line) in index.items():
        if shown in absent:
            continue
        problems.append(InputProblem(f"{OTDR_DIR}/{INDEX_FILE}", line, "file",
                                     "the name of a .sor file in the otdr folder (not found)", shown))
    for path in sorted(p for p in folder.glob("*.csv") if p.name != INDEX_FILE and p.is_file()
                       and not p.name.startswith((".", "~$"))):
        shown = path.relative_to(root).as_posix()
        if not is_inside(root, path):
            problems.append(outside_problem(shown))
            continue
        files.append(shown)
        traces += _event_table(path, shown, by_id, units, problems)
    problems += _duplicates(traces)
    if all_link_ids is None:  # links.csv unreadable: it is the problem to report
        return (), files, [p for p in problems if p.field not in ("link_id", "GenParams cable id", "strand")]
    problems = [p for p in problems if not (p.field in ("link_id", "GenParams cable id")
                                            and (p.found or "").strip() in known_elsewhere)]
    return tuple(traces), files, problems


def _read_index(root: Path, path: Path, by_id: Mapping[str, Link], problems: list[InputProblem]
                ) -> dict[str, tuple[str, int, Direction, int]]:
    shown = f"{OTDR_DIR}/{INDEX_FILE}"
    table, table_problems = read_csv(path, shown, required=INDEX_REQUIRED, optional=())
    problems += table_problems
    if table is None or any(not table.has(group[0]) for group in INDEX_REQUIRED):
        return {}
    out = {}
    for i, line in enumerate(table.lines):
        if line in table.unreadable:
            continue
        cell = {name: table.columns[name][i] for name in ("file", "link_id", "strand", "direction")}
        link = _link(cell["link_id"], by_id, shown, line, problems)
        strand = _strand(cell["strand"], link, shown, line, problems)
        direction = _direction(cell["direction"], shown, line, problems)
        written = cell["file"].replace("\\", "/").strip()
        if not written.lower().endswith(".sor"):
            problems.append(InputProblem(shown, line, "file", "the name of a .sor file, relative to "
                                         "the otdr folder", written))
            continue
        if link is None or strand is None or direction is None:
            continue
        out[f"{OTDR_DIR}/{written}"] = (link.link_id, strand, direction, line)
    return out


def _link(text: str, by_id: Mapping[str, Link], file: str, line: int | None,
          problems: list[InputProblem], field: str = "link_id") -> Link | None:
    link = by_id.get(text.strip())
    if link is None:
        problems.append(InputProblem(file, line, field, "a link_id of links.csv", text))
    return link


def _strand(text: str, link: Link | None, file: str, line: int | None, problems: list[InputProblem],
            field: str = "strand") -> int | None:
    top = link.strands if link else 1000
    value = text.strip()
    if not value.isdigit() or not 1 <= int(value) <= top:
        problems.append(InputProblem(file, line, field, f"a strand number from 1 to {top}", text))
        return None
    return int(value)


def _direction(text: str, file: str, line: int | None, problems: list[InputProblem]) -> Direction | None:
    member = match_enum(Direction, text.strip())
    if member is None:
        problems.append(InputProblem(file, line, "direction", f"one of {enum_choices(Direction)}", text))
    return member


def _trace_file(path: Path, shown: str, indexed: tuple[str, int, Direction, int] | None,
                by_id: Mapping[str, Link], problems: list[InputProblem]) -> OtdrTrace | None:
    data, read_problems = read_bytes(path, shown)
    if data is None:
        problems += read_problems
        return None
    try:
        sor = read_sor(data)
    except SorError as error:
        problems.append(InputProblem(shown, None, None, f"an OTDR trace file of SR-4731 issue 1 or 2: {error}"))
        return None
    if indexed is not None:
        link_id, strand, direction, _line = indexed
    else:
        link = by_id.get(sor.cable_id.strip())
        if link is None:
            problems.append(InputProblem(
                shown, None, "GenParams cable id",
                f"a link_id of links.csv (or a row for this file in {OTDR_DIR}/{INDEX_FILE})", sor.cable_id))
            return None
        strand_problems: list[InputProblem] = []
        strand = _strand(sor.fiber_id, link, shown, None, strand_problems, "GenParams fiber id")
        origin = sor.origin.strip().casefold()
        direction = (Direction.AB if origin == link.end_a.strip().casefold()
                     else Direction.BA if origin == link.end_b.strip().casefold() else None)
        if direction is None:
            strand_problems.append(InputProblem(
                shown, None, "GenParams originating location",
                f"end_a ({link.end_a!r}) or end_b ({link.end_b!r}) of link {link.link_id}", sor.origin))
        problems += strand_problems
        if strand is None or direction is None:
            return None
        link_id = link.link_id
    n = sor.group_index
    events = []
    for event in sor.events:
        position = distance_from_time(2 * event.time_100ps * 1e-10, n)
        kind = (OtdrEventKind.END if event.end_of_fiber
                else OtdrEventKind.LAUNCH if position < LAUNCH_WITHIN_M
                else OtdrEventKind.CONNECTOR if event.reflective else OtdrEventKind.SPLICE)
        events.append(OtdrEvent(position, kind, event.loss_db,
                                event.reflectance_db if event.reflective else None))
    wavelength = sor.nominal_wavelength_nm or round(sor.wavelength_nm)
    tested = datetime.fromtimestamp(sor.timestamp, tz=timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ")
    return OtdrTrace(
        source_file=shown, source_line=None, link_id=link_id, strand=strand, wavelength_nm=wavelength,
        direction=direction, events=tuple(events), pulse_ns=float(sor.pulse_width_ns), group_index=n,
        sample_spacing_m=distance_from_time(2 * sor.sample_spacing_s, n), samples_db=sor.samples_db,
        total_loss_db=sor.total_loss_db, tested_at=tested,
        instrument=" ".join(t for t in (sor.mainframe, sor.mainframe_serial) if t), technician=sor.operator)


def _number(text: str, file: str, line: int, field: str, expected: str, low: float, high: float,
            problems: list[InputProblem], required: bool = True) -> float | None:
    value = text.strip()
    if not value and not required:
        return None
    number = float(value) if NUMBER_TEXT.fullmatch(value) else math.nan
    if not math.isfinite(number) or not low <= number <= high:
        hint = DECIMAL_HINT if DECIMAL_COMMA_TEXT.fullmatch(value) else ""
        problems.append(InputProblem(file, line, field, f"a number {expected}{hint}", text))
        return None
    return number


def _event_table(path: Path, shown: str, by_id: Mapping[str, Link], units: LengthUnit | None,
                 problems: list[InputProblem]) -> list[OtdrTrace]:
    table, table_problems = read_csv(path, shown, required=EVENTS_REQUIRED,
                                     optional=EVENTS_OPTIONAL + DISTANCE_COLUMNS,
                                     decimal=("loss_db", "reflectance_db", *DISTANCE_COLUMNS))
    problems += table_problems
    if table is None or any(not any(table.has(n) for n in group) for group in EVENTS_REQUIRED):
        return []
    distance_column = next(n for n in DISTANCE_COLUMNS if table.has(n))
    in_feet = distance_column == "distance_ft" or (distance_column == "distance" and units is LengthUnit.FT)
    groups: dict[tuple[str, int, int, Direction], list[tuple[int, OtdrEvent, dict[str, str], dict[str, Any]]]] = {}
    for i, line in enumerate(table.lines):
        if line in table.unreadable:
            continue
        cell = {name: values[i] for name, values in table.columns.items()}
        before = len(problems)
        link = _link(cell["link_id"], by_id, shown, line, problems)
        strand = _strand(cell["strand"], link, shown, line, problems)
        wl_text = cell["wavelength_nm"].strip()
        low_nm, high_nm = WAVELENGTH_RANGE_NM
        wavelength = int(wl_text) if wl_text.isdigit() and low_nm <= int(wl_text) <= high_nm else None
        if wavelength is None:
            problems.append(InputProblem(shown, line, "wavelength_nm",
                                         f"a wavelength in whole nm from {low_nm} to {high_nm}",
                                         cell["wavelength_nm"]))
        direction = _direction(cell["direction"], shown, line, problems)
        distance = _number(cell[distance_column], shown, line, distance_column,
                           "of 0 or more (distance from where the trace starts)", 0.0, 1e7, problems)
        kind = match_enum(OtdrEventKind, cell["event"].strip())
        if kind is None:
            problems.append(InputProblem(shown, line, "event", f"one of {enum_choices(OtdrEventKind)}",
                                         cell["event"]))
        loss = _number(cell["loss_db"], shown, line, "loss_db", "from -10 to 60 dB", -10.0, 60.0, problems)
        reflectance = _number(cell.get("reflectance_db", ""), shown, line, "reflectance_db",
                              "from -100 to 0 dB (or empty)", -100.0, 0.0, problems, required=False)
        for name in ("tested_at", "instrument", "technician"):
            if not cell[name].strip():
                problems.append(InputProblem(shown, line, name, "a non-empty value"))
        options = {}
        for name, low, high, words in (("pulse_ns", 0.1, 1e6, "from 0.1 to 1000000 ns (or empty)"),
                                       ("group_index", 1.0, 2.0, "from 1 to 2 (or empty)"),
                                       ("launch_cord_m", 0.0, MAX_CORD_M, "of 0 m or more (or empty)"),
                                       ("receive_cord_m", 0.0, MAX_CORD_M, "of 0 m or more (or empty)")):
            options[name] = _number(cell.get(name, ""), shown, line, name, words, low, high, problems,
                                    required=False)
        if len(problems) > before:
            continue
        assert link and strand and wavelength and direction and kind and distance is not None and loss is not None
        event = OtdrEvent(ft_to_m(distance) if in_feet else distance, kind, loss, reflectance)
        groups.setdefault((link.link_id, strand, wavelength, direction), []).append(
            (line, event, cell, options))
    traces = []
    for (link_id, strand, wavelength, direction), rows in groups.items():
        first, given = rows[0][2], rows[0][3]
        traces.append(OtdrTrace(
            source_file=shown, source_line=rows[0][0], link_id=link_id, strand=strand,
            wavelength_nm=wavelength, direction=direction,
            events=tuple(sorted((row[1] for row in rows), key=lambda e: e.position_m)),
            pulse_ns=given["pulse_ns"], group_index=given["group_index"],
            tested_at=first["tested_at"].strip(), instrument=first["instrument"].strip(),
            technician=first["technician"].strip(), launch_cord_m=given["launch_cord_m"],
            receive_cord_m=given["receive_cord_m"]))
    return traces


def _duplicates(traces: Sequence[OtdrTrace]) -> list[InputProblem]:
    seen: dict[tuple[str, int, int, Direction], OtdrTrace] = {}
    problems = []
    for trace in traces:
        key = (trace.link_id, trace.strand, trace.wavelength_nm, trace.direction)
        if key in seen:
            problems.append(InputProblem(
                trace.source_file, trace.source_line, None,
                f"one OTDR trace per link, strand, wavelength and direction; link {key[0]} strand {key[1]} "
                f"at {key[2]} nm {key[3].value} is also in {seen[key].source_file}"))
        else:
            seen[key] = trace
    return problems
