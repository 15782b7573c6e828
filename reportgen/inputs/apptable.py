"""The application table: Ethernet PMDs, Fibre Channel rates, PON loss classes, as data.

The table ships as ``reportgen/data/applications.yaml``, every value with its source and
status. This module reads and checks it, lists it, and checks the application ids a
project names; :mod:`reportgen.engine.applications` assesses links against it.
"""
from __future__ import annotations

import difflib
from collections.abc import Iterable, Mapping
from functools import lru_cache
from importlib import resources
from typing import Any, Final

import yaml

from reportgen.errors import InputProblem, ReportgenError
from reportgen.model import Application, ApplicationTable, FiberLimits, FiberType, Link

TABLE_FILE: Final = "applications.yaml"
EXAMPLE_ID: Final = "10GBASE-SR"


# ------------------------------------------------------------------ the table


@lru_cache(maxsize=1)
def load_applications() -> ApplicationTable:
    """The built-in application table (read once)."""
    text = (resources.files("reportgen") / "data" / TABLE_FILE).read_text(encoding="utf-8")
    return parse_applications(yaml.safe_load(text), f"built-in {TABLE_FILE}")


def parse_applications(data: Any, shown_as: str) -> ApplicationTable:
    """Check the table's YAML data; a broken table is an internal error, named precisely."""

    def fail(where: str, expected: str, found: Any) -> ReportgenError:
        return ReportgenError(f"{shown_as}, {where}: expected {expected} (got {found!r})")

    if not isinstance(data, Mapping) or not isinstance(data.get("applications"), list):
        raise fail("applications", "a list of entries", type(data).__name__)
    entries: list[Application] = []
    for index, raw in enumerate(data["applications"]):
        where = f"applications[{index}]"
        if not isinstance(raw, Mapping):
            raise fail(where, "a mapping", raw)
        for key in ("id", "family", "source"):
            if not isinstance(raw.get(key), str) or not raw[key].strip():
                raise fail(f"{where}.{key}", "a non-empty text", raw.get(key))
        where = f"application {raw['id']}"
        if raw["id"] in {entry.id for entry in entries}:
            raise fail(f"{where}.id", "an id not used before", raw["id"])
        entries.append(Application(
            id=raw["id"], family=raw["family"], source=raw["source"],
            operating_nm=_wavelengths(raw.get("operating_nm"), f"{where}.operating_nm", fail),
            test_wavelengths_nm=_wavelengths(raw.get("test_wavelengths_nm"),
                                             f"{where}.test_wavelengths_nm", fail),
            strands=int(_number(raw.get("strands"), f"{where}.strands", fail)),
            fibers=_fiber_rows(raw.get("fibers"), f"{where}.fibers", fail),
        ))
    return ApplicationTable(str(data.get("title", "")), dict(data.get("sources") or {}),
                            tuple(entries))


def _number(value: Any, where: str, fail) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float)) or value < 0:
        raise fail(where, "a number ≥ 0", value)
    return float(value)


def _wavelengths(value: Any, where: str, fail) -> tuple[int, ...]:
    if (not isinstance(value, list) or not value
            or not all(isinstance(v, int) and not isinstance(v, bool) and v > 0 for v in value)):
        raise fail(where, "a non-empty list of wavelengths in nm", value)
    return tuple(value)


def _fiber_rows(value: Any, where: str, fail) -> tuple[FiberLimits, ...]:
    if not isinstance(value, list) or not value:
        raise fail(where, "a non-empty list of rows", value)
    rows: list[FiberLimits] = []
    covered: set[FiberType] = set()
    for index, raw in enumerate(value):
        at = f"{where}[{index}]"
        names = raw.get("types") if isinstance(raw, Mapping) else None
        if not isinstance(names, list) or not names or not all(
                name in {f.value for f in FiberType} for name in names):
            raise fail(f"{at}.types", "a list of fiber types", names)
        types = tuple(FiberType(name) for name in names)
        if covered & set(types):
            raise fail(f"{at}.types", "fiber types not listed in an earlier row", names)
        covered |= set(types)
        status = raw.get("status")
        if not isinstance(status, str) or not any(
                word in status for word in ("verified", "derived", "from memory")):
            raise fail(f"{at}.status", "'verified, secondary', 'derived' or 'from memory'", status)
        min_loss = raw.get("min_loss_db")
        rows.append(FiberLimits(
            fiber_types=types,
            max_length_m=_number(raw.get("max_length_m"), f"{at}.max_length_m", fail),
            max_loss_db=_number(raw.get("max_loss_db"), f"{at}.max_loss_db", fail),
            min_loss_db=None if min_loss is None else _number(min_loss, f"{at}.min_loss_db", fail),
            status=status,
        ))
    return tuple(rows)


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


def validate_application_ids(
    links: Iterable[Link], table: ApplicationTable | None = None
) -> list[InputProblem]:
    """One problem per application id in links.csv that the table does not know.

    The example in the message is the closest known id (difflib, case-insensitive),
    or 10GBASE-SR when nothing is close.
    """
    table = table or load_applications()
    known = {application_id.upper(): application_id for application_id in table.ids}
    problems = []
    for link in links:
        for application_id in link.applications:
            if application_id in table:
                continue
            close = difflib.get_close_matches(application_id.upper(), list(known), n=1)
            example = known[close[0]] if close else EXAMPLE_ID
            problems.append(InputProblem(
                "links.csv", link.line or None, "applications",
                f"an application id such as {example} (see 'reportgen applications')",
                application_id))
    return problems
