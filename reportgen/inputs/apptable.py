"""The application table: Ethernet PMDs, Fibre Channel rates, PON loss classes, as data.

The table ships as ``reportgen/data/applications.yaml``, every value with its source and
status. This module reads and checks it, lists it, and checks the application ids a
project names; :mod:`reportgen.engine.applications` assesses links against it.
"""
from __future__ import annotations

import dataclasses
import difflib
import hashlib
import math
from collections.abc import Iterable, Mapping
from functools import lru_cache
from importlib import resources
from typing import Any, Final

from reportgen.errors import InputError, InputProblem
from reportgen.inputs.checker import Checker, enum_choices, match_enum
from reportgen.inputs.files import parse_yaml
from reportgen.model import Application, ApplicationTable, FiberLimits, FiberType, Link

TABLE_FILE: Final = "applications.yaml"
EXAMPLE_ID: Final = "10GBASE-SR"


# ------------------------------------------------------------------ the table


@lru_cache(maxsize=1)
def load_applications() -> ApplicationTable:
    """The built-in application table (read once, like project.yaml: a key given twice is refused).

    Raises
    ------
    InputError
        Every problem of the table at once (a broken table is a fault of this installation).
    """
    text = (resources.files("reportgen") / "data" / TABLE_FILE).read_text(encoding="utf-8")
    return read_applications(text, f"built-in {TABLE_FILE}")


def table_version() -> str:
    """The built-in table's version: its file name and the SHA-256 of its bytes (manifest)."""
    data = (resources.files("reportgen") / "data" / TABLE_FILE).read_bytes()
    return f"{TABLE_FILE} sha256:{hashlib.sha256(data).hexdigest()}"


def read_applications(text: str, shown: str) -> ApplicationTable:
    """The table from the text of its YAML file; raises one InputError naming every problem."""
    data, problems = parse_yaml(text, shown)
    if data is None and problems:
        raise InputError(problems)
    table, value_problems = check_applications(data, shown)
    if problems or table is None:
        raise InputError(problems + value_problems)
    return table


def parse_applications(data: Any, shown_as: str) -> ApplicationTable:
    """Check the table's YAML data; raises one InputError naming every bad value."""
    table, problems = check_applications(data, shown_as)
    if table is None:
        raise InputError(problems)
    return table


def check_applications(data: Any, shown_as: str) -> tuple[ApplicationTable | None, list[InputProblem]]:
    """The table from its YAML data, or None and every problem found (one per bad value)."""
    check = Checker(None, shown_as)
    if not isinstance(data, Mapping) or not isinstance(data.get("applications"), list):
        check.problem("applications", "a list of entries",
                      data.get("applications") if isinstance(data, Mapping) else type(data).__name__)
        return None, check.problems
    entries: list[Application] = []
    first_index: dict[str, int] = {}
    for index, raw in enumerate(data["applications"]):
        where = f"applications[{index}]"
        if not isinstance(raw, Mapping):
            check.problem(where, "a mapping", raw)
            continue
        texts = {key: check.text(raw, key, f"{where}.{key}", required=True)
                 for key in ("id", "family", "source")}
        if texts["id"] is not None:
            where = f"application {texts['id']}"
            folded = texts["id"].lower()
            if folded in first_index:  # ids are matched ignoring case, so they must differ in more
                check.problem(f"{where}.id", "an id not used before, ignoring case "
                              f"(applications[{first_index[folded]}] has it)", texts["id"])
            first_index.setdefault(folded, index)
        operating = _wavelengths(check, raw.get("operating_nm"), f"{where}.operating_nm")
        tested = _wavelengths(check, raw.get("test_wavelengths_nm"), f"{where}.test_wavelengths_nm")
        strands = _strands(check, raw.get("strands"), f"{where}.strands")
        fibers = _fiber_rows(check, raw.get("fibers"), f"{where}.fibers")
        if None in (*texts.values(), operating, tested, strands, fibers):
            continue
        entries.append(Application(id=texts["id"], family=texts["family"], source=texts["source"],
                                   operating_nm=operating, test_wavelengths_nm=tested,
                                   strands=strands, fibers=fibers))
    if check.problems:
        return None, check.problems
    return ApplicationTable(str(data.get("title", "")), dict(data.get("sources") or {}),
                            tuple(entries)), []


def _strands(check: Checker, value: Any, where: str) -> int | None:
    if value is None:
        check.problem(where, "a whole number of fibers ≥ 1")
        return None
    number = check.number(value, where, "of fibers, a whole number ≥ 1", 1.0, math.inf)
    if number is not None and number != int(number):
        check.problem(where, "a whole number of fibers ≥ 1", value)
        return None
    return None if number is None else int(number)


def _loss(check: Checker, value: Any, where: str) -> float | None:
    if value is None:
        check.problem(where, "a number ≥ 0")
        return None
    return check.number(value, where, "≥ 0", 0.0, math.inf)


def _wavelengths(check: Checker, value: Any, where: str) -> tuple[int, ...] | None:
    if not isinstance(value, list) or not value:
        check.problem(where, "a non-empty list of wavelengths in nm", value)
        return None
    wavelengths = [check.wavelength(item, where) for item in value]
    return None if None in wavelengths else tuple(wavelengths)


def _fiber_rows(check: Checker, value: Any, where: str) -> tuple[FiberLimits, ...] | None:
    if not isinstance(value, list) or not value:
        check.problem(where, "a non-empty list of rows", value)
        return None
    rows: list[FiberLimits] = []
    covered: set[FiberType] = set()
    complete = True
    for index, raw in enumerate(value):
        at = f"{where}[{index}]"
        if not isinstance(raw, Mapping):
            check.problem(at, "a mapping with types, max_length_m, max_loss_db and status", raw)
            complete = False
            continue
        names = raw.get("types")
        types = tuple(match_enum(FiberType, str(name)) for name in names) if isinstance(names, list) else ()
        if not types or None in types:
            check.problem(f"{at}.types", f"a list of fiber types, each one of {enum_choices(FiberType)}",
                          names)
            types = ()
        elif covered & set(types):
            check.problem(f"{at}.types", "fiber types not listed in an earlier row", names)
            types = ()
        covered |= set(types)
        status = raw.get("status")
        if not isinstance(status, str) or not any(
                word in status for word in ("verified", "derived", "from memory")):
            check.problem(f"{at}.status", "'verified, secondary', 'derived' or 'from memory'",
                          *(() if status is None else (status,)))
            status = None
        # null: the standard sets no reach for this row (not checked); the key must be given
        no_reach = "max_length_m" in raw and raw["max_length_m"] is None
        max_length_m = None if no_reach else _loss(check, raw.get("max_length_m"),
                                                   f"{at}.max_length_m")
        max_loss_db = _loss(check, raw.get("max_loss_db"), f"{at}.max_loss_db")
        min_loss = raw.get("min_loss_db")
        min_loss_db = None if min_loss is None else _loss(check, min_loss, f"{at}.min_loss_db")
        if (not types or status is None or (max_length_m is None and not no_reach)
                or max_loss_db is None
                or (min_loss is not None and min_loss_db is None)):
            complete = False
            continue
        rows.append(FiberLimits(fiber_types=types, max_length_m=max_length_m, max_loss_db=max_loss_db,
                                min_loss_db=min_loss_db, status=status))
    return tuple(rows) if complete else None


DESCRIBE_COLUMNS: Final[tuple[str, ...]] = (
    "id", "family", "fiber_types", "operating_nm", "test_wavelengths_nm", "strands",
    "max_length_m", "min_loss_db", "max_loss_db", "source", "status",
)


def describe_rows(table: ApplicationTable | None = None) -> list[dict[str, Any]]:
    """The table as flat rows for printing: one per application and fiber row.

    Keys are :data:`DESCRIBE_COLUMNS`, in that order; lists are joined with ", ";
    ``min_loss_db`` is None where the entry has no minimum.
    """
    table = table or load_applications()
    return [
        {
            "id": entry.id,
            "family": entry.family,
            "fiber_types": ", ".join(fiber.value for fiber in row.fiber_types),
            "operating_nm": ", ".join(str(wl) for wl in entry.operating_nm),
            "test_wavelengths_nm": ", ".join(str(wl) for wl in entry.test_wavelengths_nm),
            "strands": entry.strands,
            "max_length_m": row.max_length_m,
            "min_loss_db": row.min_loss_db,
            "max_loss_db": row.max_loss_db,
            "source": entry.source,
            "status": row.status,
        }
        for entry in table.entries
        for row in entry.fibers
    ]


def check_application_ids(
    links: Iterable[Link], table: ApplicationTable | None = None
) -> tuple[list[Link], list[InputProblem]]:
    """The links with their application ids in the table's spelling, and one problem per
    application id in links.csv that the table does not know.

    Ids are matched ignoring case (``10gbase-sr`` is ``10GBASE-SR``): the trade writes PMD
    names in either case and no two entries of the table differ only in case. The example
    in a problem is the closest known id (difflib, case-insensitive), or 10GBASE-SR when
    nothing is close.
    """
    table = table or load_applications()
    known = {application_id.upper(): application_id for application_id in table.ids}
    checked: list[Link] = []
    problems = []
    for link in links:
        spelt = []
        for application_id in link.applications:
            if application_id.upper() in known:
                spelt.append(known[application_id.upper()])
                continue
            close = difflib.get_close_matches(application_id.upper(), list(known), n=1)
            example = known[close[0]] if close else EXAMPLE_ID
            problems.append(InputProblem(
                "links.csv", link.line or None, "applications",
                f"an application id such as {example} (see 'reportgen applications')",
                application_id))
        checked.append(link if tuple(spelt) == link.applications
                       else dataclasses.replace(link, applications=tuple(spelt)))
    return checked, problems
