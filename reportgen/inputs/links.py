"""The rows of links.csv (or of a links import) checked into ``Link`` objects.

:func:`check_links` checks every row of a links table against the project's catalogs (fiber
types, components, transceivers) and limits; :func:`wavelength_coverage` checks that the limit
set has a coefficient for every wavelength the links' fiber types need. Every problem is
collected with its file, line and column, as in the rest of :mod:`reportgen.inputs`;
:mod:`reportgen.inputs.project` reads the file and calls these.
"""
from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import Final

from reportgen.errors import InputProblem
from reportgen.inputs.checker import DECIMAL_COMMA_TEXT, DECIMAL_HINT, NUMBER_TEXT, enum_choices, match_enum
from reportgen.inputs.csvread import CsvTable
from reportgen.inputs.files import clip
from reportgen.inputs.project_yaml import Settings
from reportgen.inputs.results import EMPTY, LENGTH_COLUMNS, MAX_LENGTH_M
from reportgen.model import Component, FiberType, LengthUnit, LimitSet, Link, Plant, Transceiver
from reportgen.units import ft_to_m

LINK_REQUIRED: Final = (("link_id",), ("end_a",), ("end_b",), ("fiber_type",), LENGTH_COLUMNS)
LINK_OPTIONAL: Final = ("plant", "strands", "connections", "splices", "components", "applications",
                        "transceiver", "notes")
MAX_STRANDS: Final = 1000
MAX_COUNT: Final = 1000  # connections or splices on one link


def _number(text: str, column: str, expected: str, line: int, file: str,
            problems: list[InputProblem]) -> float | None:
    if NUMBER_TEXT.fullmatch(text):
        return float(text)
    hint = DECIMAL_HINT if DECIMAL_COMMA_TEXT.fullmatch(text) else ""
    problems.append(InputProblem(file, line, column, expected + hint, clip(text)))
    return None


def _count(text: str, column: str, low: int, high: int, default: int, line: int, file: str,
           problems: list[InputProblem]) -> int | None:
    if not text:
        return default
    value = float(text) if NUMBER_TEXT.fullmatch(text) else None
    if value is None or not low <= value <= high or value != int(value):  # range first: int(inf) fails
        problems.append(InputProblem(file, line, column, f"a whole number from {low} to {high}", clip(text)))
        return None
    return int(value)


def _ids(text: str) -> tuple[str, ...]:
    return tuple(part.strip() for part in text.split(";") if part.strip())


def _catalog_text(catalog: Mapping[str, object], name: str) -> str:
    ids = sorted(catalog)
    if not ids:
        return f"the {name} catalog in project.yaml is empty"
    listed = ", ".join(ids[:10]) + (", ..." if len(ids) > 10 else "")
    return f"{name} in project.yaml: {listed}"


def check_links(table: CsvTable, settings: Settings) -> tuple[list[Link], list[InputProblem]]:
    """Check every row of links.csv; returns the valid links and every problem, in line order."""
    file = table.file
    cols = table.columns
    n = len(table)
    blank = [""] * n
    get = {name: cols.get(name, blank) for name in (*(g[0] for g in LINK_REQUIRED), *LENGTH_COLUMNS,
                                                    *LINK_OPTIONAL)}
    length_present = [name for name in LENGTH_COLUMNS if name in cols]
    limits: LimitSet | None = settings.limits
    components: Mapping[str, Component] | None = settings.components
    transceivers: Mapping[str, Transceiver] | None = settings.transceivers
    links: list[Link] = []
    problems: list[InputProblem] = []
    first_line: dict[str, int] = {}
    # required columns the header lacks: reported once on the header, not on every row
    absent = {group[0] for group in LINK_REQUIRED if not any(table.has(name) for name in group)}
    for row, line in enumerate(table.lines):
        if line in table.unreadable:  # reported once as a row of too many cells
            continue
        row_problems: list[InputProblem] = []

        def problem(column: str, expected: str, found: str | None = None) -> None:
            if column in absent:
                return
            row_problems.append(InputProblem(file, line, column, expected,
                                             None if found is None else clip(found)))

        link_id = get["link_id"][row]
        if not link_id:
            problem("link_id", "a unique link_id" + EMPTY)
        elif link_id in first_line:
            problem("link_id", f"a link_id not used before (first used on line {first_line[link_id]})",
                    link_id)
        else:
            first_line[link_id] = line
        for column in ("end_a", "end_b"):
            if not get[column][row]:
                problem(column, "where the link ends (room, rack, panel, port)" + EMPTY)

        fiber_text = get["fiber_type"][row]
        fiber = match_enum(FiberType, fiber_text) if fiber_text else None
        if fiber is None:
            problem("fiber_type", f"one of {enum_choices(FiberType)}" + ("" if fiber_text else EMPTY),
                    fiber_text or None)
        elif limits is not None and not limits.covers(fiber):
            covered = ", ".join(member.value for member in FiberType if limits.covers(member))
            problem("fiber_type", f"a fiber type that limit set {limits.id} covers: {covered}", fiber_text)
            fiber = None

        plant_text = get["plant"][row]
        plant = match_enum(Plant, plant_text) if plant_text else Plant.INSIDE
        if plant is None:
            problem("plant", f"one of {enum_choices(Plant)}", plant_text)

        length_m = _link_length(get, length_present, row, settings.units, problem, line, file,
                                row_problems)
        strands = _count(get["strands"][row], "strands", 1, MAX_STRANDS, 1, line, file, row_problems)
        connections = _count(get["connections"][row], "connections", 0, MAX_COUNT, 0, line, file,
                             row_problems)
        splices = _count(get["splices"][row], "splices", 0, MAX_COUNT, 0, line, file, row_problems)

        parts = _ids(get["components"][row])
        if components is not None:
            for part in parts:
                if part not in components:
                    problem("components", f"ids from {_catalog_text(components, 'components')}", part)
        transceiver = get["transceiver"][row] or None
        if transceiver and transceivers is not None and transceiver not in transceivers:
            problem("transceiver", f"an id from {_catalog_text(transceivers, 'transceivers')}", transceiver)

        problems += row_problems
        if row_problems or fiber is None or length_m is None:
            continue
        links.append(Link(
            link_id=link_id, end_a=get["end_a"][row], end_b=get["end_b"][row], fiber_type=fiber,
            length_m=length_m, plant=plant, strands=strands, connections=connections, splices=splices,
            components=parts, applications=_ids(get["applications"][row]), transceiver=transceiver,
            notes=get["notes"][row] or None, line=line,
        ))
    return links, problems


def _link_length(get: Mapping[str, Sequence[str]], present: Sequence[str], row: int,
                 units: LengthUnit | None, problem, line: int, file: str,
                 row_problems: list[InputProblem]) -> float | None:
    """Documented length [m] from exactly one of length (testing.units), length_m, length_ft."""
    if not present:  # no length column: reported once on the header
        return None
    given = [name for name in present if get[name][row]]
    if len(given) != 1:
        field = "/".join(present)
        if not given:
            problem(field, f"a length in {'one of these columns' if len(present) > 1 else 'm or ft'}"
                    + (EMPTY if len(present) == 1 else " (all are empty)"))
        else:
            problem(field, "a length in only one of these columns",
                    " and ".join(get[name][row] for name in given))
        return None
    name = given[0]
    unit = {"length_m": LengthUnit.M, "length_ft": LengthUnit.FT}.get(name, units)
    expected = f"a length{'' if unit is None else ' in ' + unit.value}, greater than 0 and at most 200 km"
    value = _number(get[name][row], name, expected, line, file, row_problems)
    if value is None:
        return None
    if unit is None:
        return None  # testing.units is unusable: that problem is reported on project.yaml
    length_m = ft_to_m(value) if unit is LengthUnit.FT else value
    if not 0 < length_m <= MAX_LENGTH_M:
        problem(name, expected, get[name][row])
        return None
    return length_m


def wavelength_coverage(settings: Settings, links: Sequence[Link]) -> list[InputProblem]:
    """testing.wavelengths: each listed wavelength must be defined by the limit set for every
    fiber type (and plant) of that category the links use."""
    limits = settings.limits
    if limits is None or not settings.wavelength_override:
        return []
    problems = []
    used = sorted({(link.fiber_type, link.plant) for link in links})
    for category, wavelengths in settings.wavelength_override.items():
        for fiber, plant in used:
            if fiber.category is not category:
                continue
            defined = limits.wavelengths_nm(fiber, plant)
            missing = [wavelength for wavelength in wavelengths if wavelength not in defined]
            if missing:
                outside = ", outside plant" if (plant is Plant.OUTSIDE and
                                                fiber in limits.attenuation_db_per_km_outside) else ""
                problems.append(InputProblem(
                    "project.yaml", None, f"testing.wavelengths.{category.value}",
                    f"only wavelengths that limit set {limits.id} defines for {fiber.value}{outside}: "
                    f"{', '.join(map(str, defined))}", ", ".join(map(str, missing))))
    return problems
